"""Many burnout-count ranges of one fleet at once: uncertainty.count_mixture per selection.

A forecast asks for the range of every area and of the whole site: the same positions, the
same lamp types and spreads, only the selections differ. Each selection's answer is
count_mixture's (reliability/uncertainty.py, reliability/mixture.py: the same rule per
(selection, lamp type, outer shape node) for exact recursion, refined normal or Poisson
rows, the same spans, bins, convolution and quantiles); the array work is shared:

- each position's window probabilities at the nodes, once per (lamp type, shape node),
  whichever selections hold it;
- the moment sums of every (selection, type, node) item by one segmented sum, and their
  fine-grid moments by one interpolation per rule;
- the exact recursion of all small items together, zero-padded: a p = 0 Bernoulli leaves a
  pmf unchanged, and a deeper truncation leaves the lower counts unchanged;
- the refined-normal CDF at every item's bin edges in one flat evaluation, and the Poisson
  rows' running sums in padded blocks (mixture_batch_cdf.py);
- the lamp types' convolutions by batched FFT (mixture_batch_bins.convolve_many).

Results equal count_mixture's up to floating-point summation order (checked selection by
selection in tests/unit/reliability/test_mixture_batch.py).
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray

from service.reliability import mixture as mx
from service.reliability import mixture_batch_cdf as bc
from service.reliability.arrays import FloatArray, IntArray
from service.reliability.mixture_batch_bins import binned_quantiles
from service.reliability.uncertainty import (
    FORECAST_EXACT_BUDGET,
    MIXTURE_METHOD,
    CountRange,
    window_p,
)


@dataclass(frozen=True)
class FleetCurves:
    """Per position its lamp type group, window and curve; per group the parameter spreads."""

    group: IntArray
    age_h: FloatArray
    horizon_h: FloatArray
    shape: FloatArray
    scale_h: FloatArray
    sd_ln_shape: FloatArray  # per group
    sd_ln_scale: FloatArray  # per group


@dataclass(frozen=True)
class Items:
    """Every (selection, group, outer node) of the batch, parallel arrays (I,)."""

    sel: IntArray
    grp: IntArray
    node_w: FloatArray  # the outer (shape) node's weight
    n: IntArray  # positions
    mixtures: list[mx.Mixture]
    spans: IntArray  # (I, 2): Mixture.span() of each
    stats: FloatArray  # (I, 3): weighted E[S], E[S^2], E[sum p(1-p)] as count_mixture sums


def _outer(sd_shape: float) -> tuple[FloatArray, FloatArray]:
    if sd_shape > 0:
        return mx.gauss_hermite(mx.SHAPE_NODES)
    return np.zeros(1), np.ones(1)


def _rule(sd_scale: float) -> mx.Rule:
    return mx.rule() if sd_scale > 0 else mx.rule(1)


def _segments(group: IntArray, selections: Sequence[IntArray]) -> tuple[IntArray, IntArray]:
    """Positions of every (selection, group) pair, ascending within each, and the pair keys.

    Returns (flat positions, key per flat entry) sorted by key = selection x groups + group.
    """
    n_g = int(group.max()) + 1 if group.size else 1
    sizes = np.array([np.size(s) for s in selections], dtype=np.int64)
    flat = (
        np.concatenate([np.asarray(s, dtype=np.int64) for s in selections])
        if sizes.sum()
        else np.zeros(0, np.int64)
    )
    sel_of = np.repeat(np.arange(sizes.size, dtype=np.int64), sizes)
    key = sel_of * n_g + group[flat]
    order = np.argsort(key, kind="stable")  # positions stay ascending within a pair
    return flat[order], key[order]


def _node_sums(
    fleet: FleetCurves, flat: IntArray, starts: IntArray, g: int, zs: float
) -> tuple[FloatArray, FloatArray, FloatArray, FloatArray]:
    """Moment sums (K, pairs) of group g's pairs at one outer node, and the probabilities.

    flat: the pairs' positions back to back, starts: each pair's first entry in flat.
    """
    r = _rule(float(fleet.sd_ln_scale[g]))
    # Each position once, whichever selections hold it (an area's and the site's).
    uniq, back = np.unique(flat, return_inverse=True)
    beta = fleet.shape[uniq] * math.exp(float(fleet.sd_ln_shape[g]) * zs)
    mult = mx.lognormal_multipliers(float(fleet.sd_ln_scale[g]), r.z)
    scale = fleet.scale_h[uniq][None, :] * mult[:, None]
    p_u = window_p(fleet.age_h[uniq], fleet.horizon_h[uniq], beta, scale)
    same = uniq.size == flat.size and bool(np.all(uniq == flat))
    p = p_u if same else p_u[:, np.asarray(back).ravel()]
    q = 1.0 - p
    v = p * q
    sums = [np.add.reduceat(x, starts, axis=1) for x in (p, v, v * (q - p))]
    return sums[0], sums[1], sums[2], p


def _group_items(
    fleet: FleetCurves, flat: IntArray, starts: IntArray, g: int
) -> list[tuple[float, FloatArray, mx.Moments, FloatArray]]:
    """Per outer node of group g: (weight, mean at nodes per pair, node moments, p)."""
    zb, wb = _outer(float(fleet.sd_ln_shape[g]))
    out = []
    for zs, ws in zip(zb.tolist(), wb.tolist(), strict=True):
        mean, var, third, p = _node_sums(fleet, flat, starts, g, zs)
        out.append((ws, mean, mx.Moments(mean, var, third), p))
    return out


def _spans(fine: mx.Moments, n: IntArray, exact: NDArray[np.bool_], kmax: IntArray) -> IntArray:
    """Mixture.span() of every column: (0, kmax) exact, else the fine grid's +-12 sd."""
    sd = np.sqrt(fine.var)
    lo = np.maximum(0, np.floor(np.min(fine.mean - 12 * sd, axis=0)) - 12)
    hi = np.minimum(n, np.ceil(np.max(fine.mean + 12 * sd, axis=0)) + 12)
    out = np.stack([np.where(exact, 0, lo), np.where(exact, kmax, hi)], axis=1)
    return out.astype(np.int64)


def _mixtures_of(
    mom: mx.Moments, p: FloatArray, starts: IntArray, n: IntArray, r: mx.Rule
) -> tuple[list[mx.Mixture], IntArray]:
    """mixture.mixture for every pair column of node moments (K, pairs) at once, and spans."""
    mean = np.einsum("k,kc->c", r.w, mom.mean)
    fine = mom.to_fine(r) if r.z.size > 1 else mom
    kmax = _support_max(fine, n)
    cols = r.z_fine.size
    exact = n * cols * (kmax + 1) <= FORECAST_EXACT_BUDGET
    pmfs = bc.exact_pmfs(p, starts, n, kmax, exact, r)
    out: list[mx.Mixture] = []
    for c in range(n.size):
        if exact[c]:
            out.append(mx.Mixture(mean[c : c + 1], int(n[c]), "exact", pmf=pmfs[c]))
        else:
            f = mx.Moments(*(x[:, c : c + 1] for x in (fine.mean, fine.var, fine.third)))
            out.append(mx.Mixture(mean[c : c + 1], int(n[c]), "rna", fine=f, w_fine=r.w_fine))
    return out, _spans(fine, n, exact, kmax)


def _support_max(m: mx.Moments, n: IntArray) -> IntArray:
    """mixture.support_max per column: the top count with a negligible tail, at most n."""
    top = np.max(m.mean + 12.0 * np.sqrt(m.var), axis=0) + 12.0
    finite = np.isfinite(top)
    kmax = np.minimum(n, np.ceil(np.where(finite, top, 0.0))).astype(np.int64)
    return np.where(finite, kmax, n)


def build_items(fleet: FleetCurves, selections: Sequence[IntArray]) -> Items:
    """The mixture of every (selection, group, outer node) item, moments and stats."""
    flat, key = _segments(fleet.group, selections)
    n_g = int(fleet.group.max()) + 1 if fleet.group.size else 1
    keys, starts, counts = np.unique(key, return_index=True, return_counts=True)
    sel_l: list[IntArray] = []
    grp_l: list[IntArray] = []
    w_l: list[FloatArray] = []
    n_l: list[IntArray] = []
    mixes: list[mx.Mixture] = []
    spans_l: list[IntArray] = []
    stats_l: list[FloatArray] = []
    for g in np.unique(keys % n_g).tolist():
        pick = np.nonzero(keys % n_g == g)[0]
        pos = np.concatenate([flat[starts[i] : starts[i] + counts[i]] for i in pick.tolist()])
        local = np.concatenate(([0], np.cumsum(counts[pick])[:-1])).astype(np.int64)
        r = _rule(float(fleet.sd_ln_scale[g]))
        for ws, s_k, mom, p in _group_items(fleet, pos, local, g):
            m_list, spans = _mixtures_of(mom, p, local, counts[pick].astype(np.int64), r)
            mixes.extend(m_list)
            spans_l.append(spans)
            sel_l.append(keys[pick] // n_g)
            grp_l.append(np.full(pick.size, g, dtype=np.int64))
            w_l.append(np.full(pick.size, ws))
            n_l.append(counts[pick].astype(np.int64))
            st = np.stack([r.w @ s_k, r.w @ (s_k * s_k), r.w @ mom.var], axis=1)
            stats_l.append(ws * st)
    cat = np.concatenate
    if not mixes:
        z = np.zeros(0, np.int64)
        return Items(z, z, np.zeros(0), z, [], np.zeros((0, 2), np.int64), np.zeros((0, 3)))
    return Items(cat(sel_l), cat(grp_l), cat(w_l), cat(n_l), mixes, cat(spans_l), cat(stats_l))


def count_mixtures(
    fleet: FleetCurves, selections: Sequence[IntArray], level: float = 0.90
) -> list[CountRange]:
    """count_mixture's range for each selection (ascending position indices) of the fleet."""
    if not 0 < level < 1:
        raise ValueError("level must be in (0, 1)")
    items = build_items(fleet, selections)
    tail = (1.0 - level) / 2.0
    by_sel = bc.items_by_selection(items.sel, len(selections))
    single = [s for s, it in enumerate(by_sel) if it.size == 1]
    many = [s for s, it in enumerate(by_sel) if it.size > 1]
    low = np.zeros(len(selections), dtype=np.int64)
    high = np.zeros(len(selections), dtype=np.int64)
    if single:
        only = [items.mixtures[int(by_sel[s][0])] for s in single]
        low[single] = bc.quantiles(only, tail)
        high[single] = bc.quantiles(only, 1.0 - tail)
    if many:
        lo_hi = binned_quantiles(
            [
                [
                    (int(items.grp[i]), float(items.node_w[i]), items.mixtures[i], items.spans[i])
                    for i in by_sel[s].tolist()
                ]
                for s in many
            ],
            tail,
        )
        for j, s in enumerate(many):
            n = _positions(items, by_sel[s])
            low[s], high[s] = min(lo_hi[j][0], n), min(lo_hi[j][1], n)
    return [
        _range(items, by_sel[s], fleet, level, int(low[s]), int(high[s]))
        for s in range(len(selections))
    ]


def _positions(items: Items, idx: IntArray) -> int:
    """Positions in a selection: each group's count once (not once per outer node)."""
    seen: dict[int, int] = {}
    for i in idx.tolist():
        seen[int(items.grp[i])] = int(items.n[i])
    return sum(seen.values())


def _range(
    items: Items, idx: IntArray, fleet: FleetCurves, level: float, low: int, high: int
) -> CountRange:
    """The CountRange count_mixture returns, from the items' stats and the quantiles."""
    stats = np.zeros(3)
    for g in np.unique(items.grp[idx]).tolist():
        st = items.stats[idx[items.grp[idx] == g]].sum(axis=0)
        stats += np.array([st[0], st[1] - st[0] ** 2, st[2]])
    shape = ", and its shape where the field shape is used as it is (correlation 0)"
    spread = any(fleet.sd_ln_shape[g] > 0 for g in np.unique(items.grp[idx]).tolist())
    method = MIXTURE_METHOD.format(shape=shape if spread else "", nodes=mx.NODES, fine=mx.FINE)
    return CountRange(
        float(stats[0]), low, high, level, float(stats[2]), max(float(stats[1]), 0.0), method
    )
