"""Lamp demand per week: spot replacements as a Poisson-binomial sum, plus group relamps.

The Poisson-binomial arithmetic lives in service/reliability/poisson_binomial.py (one home,
shared with the forecast's burnout range); this module applies it to weekly demand.

Each position j contributes, in week i, a replacement with probability p_ij: the increase
of its expected replacements (per-position delayed renewal, forecasting.spot_replacements) over the
week, clipped to [0, 1] (a lamp failing twice inside one week is negligible next to lamp
lives of thousands of hours). Positions fail independently, so a week's spot count is
Poisson-binomial with mean sum p and variance sum p(1 - p).

- Exact (groups of at most EXACT_MAX positions): the pmf by the discrete Fourier transform
  of the characteristic function, P(K = k) = 1/(n+1) sum_l z_l exp(-i w l k),
  z_l = prod_j (1 - p_j + p_j exp(i w l)), w = 2 pi / (n + 1) [Fernandez & Williams 2010,
  "Closed-form expression for the Poisson-binomial probability density function", IEEE
  Trans. Aerospace and Electronic Systems 46(2); Hong 2013, Comput. Stat. Data Anal. 59].
- Otherwise the normal approximation with a continuity correction: the smallest k with
  Phi((k + 0.5 - mean) / sd) >= level, i.e. k = ceil(mean + z sd - 0.5) [central limit
  theorem; the half-unit correction is textbook practice for discrete counts].

A group relamp due in week g takes all its positions' lamps that week; after it a position
starts again from a new lamp, so its spot increments follow the renewal function M of a
new lamp from week g on.

Cumulative spot replacements at every week boundary in one pass (weekly_cumulative): per
position the delayed-renewal sum N_a(w) = F_a(w) + int_0^w M(w - x) dF_a(x) [Cox, *Renewal
Theory*] on one grid of CELLS_PER_WEEK cells per week: F_a at the cell edges, M at the cell
midpoint lags, so the Stieltjes midpoint sums of all 27 boundaries are the prefix terms of one
discrete convolution, read at the week ends only (a matrix product per cell width). The midpoint rule
on a fixed cell (a quarter week) is as fine as forecasting.spot_replacements' 24 cells up to
6 weeks and finer beyond; the two agree to the latter's own quadrature error.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from functools import lru_cache

import numpy as np
from numpy.typing import NDArray
from scipy.fft import next_fast_len

from service.reliability import mixture as mx
from service.reliability.poisson_binomial import (
    EXACT_MAX,
    pmf_dft,
    quantile,
    quantile_exact,
    quantile_normal,
    quantiles_exact,
)

__all__ = [
    "EXACT_MAX",
    "pmf_dft",
    "quantile",
    "quantile_exact",
    "quantile_normal",
    "quantiles_exact",
]

from service.reliability.renewal import RenewalCurve, weibull_renewal

FloatArray = NDArray[np.float64]
IntArray = NDArray[np.int64]

CELLS_PER_WEEK = 4  # midpoint cells per week of the one-pass delayed-renewal sum
RENEWAL_GRID = 1000  # renewal grid steps per lamp type (as forecasting.spot_replacements)
# M is tabulated from the curve's cubic Hermite on this many steps, then read linearly on
# the uniform grid: the linear error h^2 M''/8 is below 1e-7 here, and a table read is
# several times cheaper than the cubic at every (position, lag).
TABLE_STEPS = 16_384
CHUNK = 20_000  # positions per block (memory: CHUNK x 2 x cells floats per array)
# Alike positions (one lamp-type row, one cell width: the same burn rate over the same scale)
# at least GROUP_MIN strong are evaluated on AGE_GRID ages and read linearly in age.
AGE_GRID = 1025
GROUP_MIN = 2 * AGE_GRID


@lru_cache(maxsize=64)
def unit_renewal(beta: float, span: float) -> RenewalCurve:
    """M of the unit-scale Weibull on [0, span], 2 x RENEWAL_GRID steps (span a power of 2)."""
    return weibull_renewal(beta, 1.0, span, 2 * RENEWAL_GRID)


@lru_cache(maxsize=64)
def _unit_table(beta: float, span: float) -> FloatArray:
    """unit_renewal(beta, span) read on 2 x TABLE_STEPS + 2 uniform steps of span / (2 x TABLE_STEPS)."""
    step = span / (2 * TABLE_STEPS)
    table: FloatArray = unit_renewal(beta, span).at(np.arange(2 * TABLE_STEPS + 2) * step)
    table.flags.writeable = False  # shared by every caller
    return table


def span_of(reach: float) -> float:
    """The power of 2 at or above reach (scale units): curves shared between calls reaching
    alike, each at least as fine as one of RENEWAL_GRID steps over reach itself."""
    return float(2.0 ** math.ceil(math.log2(max(reach, 1e-9) * 1.0001)))


def renewal_reaching(beta: float, reach: float) -> RenewalCurve:
    """The shared unit-scale renewal curve of shape beta reaching at least reach."""
    return unit_renewal(float(beta), span_of(reach))


def _read_linear(table: FloatArray, x: FloatArray) -> FloatArray:
    """Linear read of a table on the grid 0, 1, 2, ... at x (x within the table)."""
    i = np.minimum(x.astype(np.int64), table.size - 2)
    frac = x - i
    out: FloatArray = table[i] * (1.0 - frac) + table[i + 1] * frac
    return out


def _end_sums(d_f: FloatArray, m_lag: FloatArray, cls: IntArray, ends: IntArray) -> FloatArray:
    """The discrete convolution of d_f and m_lag[cls] read at the cells ends - 1 only
    (n, weeks): sum_{j < e} d_f[:, j] m_lag[cls, e - 1 - j] for each end e.

    m_lag: one row per cell width, cls: each row's width. Rows of one width are one matrix
    product d_f @ W with W[j, w] = m_lag[ends[w] - 1 - j] (j < ends[w], else 0); with
    widths nearly as many as rows, one dot per end. Direct sums of non-negative terms.
    """
    n, k_cells = d_f.shape
    if m_lag.shape[0] * 8 <= n:
        j = np.arange(k_cells)[:, None]
        lag = ends[None, :] - 1 - j
        w = np.where(lag >= 0, m_lag[:, np.maximum(lag, 0)], 0.0)  # (widths, K, weeks)
        if m_lag.shape[0] == 1:
            one: FloatArray = d_f @ w[0]
            return one
        out = np.empty((n, ends.size))
        order = np.argsort(cls, kind="stable")
        bounds = np.searchsorted(cls[order], np.arange(m_lag.shape[0] + 1))
        for c in range(m_lag.shape[0]):
            rows = order[bounds[c] : bounds[c + 1]]
            out[rows] = d_f[rows] @ w[c]
        return out
    rev = m_lag[cls, ::-1]  # m_lag[e - 1 - j] = rev[K - e + j]
    out = np.empty((n, ends.size))
    for i, e in enumerate(ends.tolist()):
        out[:, i] = np.einsum("ij,ij->i", d_f[:, :e], rev[:, k_cells - e :])
    return out


def _one_pass(
    beta: float, table: FloatArray, step: float, u_age: FloatArray, delta: FloatArray, weeks: int
) -> FloatArray:
    """N_a at week boundaries 1..weeks (m, weeks) of positions in scale units.

    The convolution int_0^w M(w - x) dF_a(x) is needed at the week ends only: its 26 sums
    directly (_end_sums), not the whole convolution by FFT; M read once per cell width.
    """
    m = CELLS_PER_WEEK
    k_cells = weeks * m
    edges = np.arange(k_cells + 1, dtype=np.float64)
    lags = edges[:-1] + 0.5
    ends = np.arange(1, weeks + 1) * m  # cells up to each boundary
    out = np.empty((u_age.size, weeks))
    for lo in range(0, u_age.size, CHUNK):
        a = u_age[lo : lo + CHUNK][:, None]
        d = delta[lo : lo + CHUNK][:, None]
        # F_a(x) = 1 - exp(-((a+x)^beta - a^beta)), written to keep precision.
        f_a = -np.expm1(-(np.power(a + d * edges[None, :], beta) - np.power(a, beta)))
        d_f = np.diff(f_a, axis=1)
        widths, cls = np.unique(d[:, 0], return_inverse=True)
        m_lag = _read_linear(table, widths[:, None] * lags[None, :] / step)
        sums = _end_sums(d_f, m_lag, cls.ravel(), ends)
        out[lo : lo + CHUNK] = f_a[:, ends] + np.maximum(sums, 0.0)
    return out


def _grouped_pass(
    beta: float, table: FloatArray, step: float, u_age: FloatArray, delta: FloatArray, weeks: int
) -> FloatArray:
    """As _one_pass, alike positions grouped: per burn rate (cell width) with many
    positions, the pass runs on AGE_GRID ages spanning theirs and each position reads its
    curve linearly between the two grid ages around its own (N_a is smooth in a)."""
    out = np.empty((u_age.size, weeks))
    widths, cls = np.unique(delta, return_inverse=True)
    cls = cls.ravel()
    counts = np.bincount(cls, minlength=widths.size)
    direct = counts[cls] < GROUP_MIN  # the rows of small classes, one pass for them all
    for c in np.nonzero(counts >= GROUP_MIN)[0].tolist():
        idx = np.nonzero(cls == c)[0]
        a = u_age[idx]
        lo, hi = float(a.min()), float(a.max())
        if hi <= lo:
            out[idx] = _one_pass(beta, table, step, a[:1], delta[idx[:1]], weeks)
            continue
        grid = np.linspace(lo, hi, AGE_GRID)
        at = _one_pass(beta, table, step, grid, np.full(AGE_GRID, widths[c]), weeks)
        x = (a - lo) / (hi - lo) * (AGE_GRID - 1)
        i = np.minimum(x.astype(np.int64), AGE_GRID - 2)
        frac = (x - i)[:, None]
        out[idx] = at[i] * (1.0 - frac) + at[i + 1] * frac
    if direct.any():
        out[direct] = _one_pass(beta, table, step, u_age[direct], delta[direct], weeks)
    return out


def weekly_cumulative(
    shape: FloatArray,
    type_index: IntArray,
    scale_h: FloatArray,
    age_h: FloatArray,
    rate_h_per_week: FloatArray,
    weeks: int,
) -> FloatArray:
    """N_a at week boundaries 0..weeks per position (n, weeks + 1): expected spot replacements.

    shape: Weibull shape per lamp-type row; type_index, scale_h (hours), age_h (burn hours of
    the lamp in place), rate_h_per_week (burn hours per week) per position.
    """
    n, m = age_h.size, CELLS_PER_WEEK
    k_cells = weeks * m
    out = np.zeros((n, weeks + 1))
    if n == 0 or weeks <= 0:
        return out
    delta = rate_h_per_week / (m * scale_h)  # cell width in units of the scale (eta = 1)
    u_age = age_h / scale_h
    for k in np.unique(type_index).tolist():
        idx = np.nonzero((type_index == k) & (delta > 0))[0]
        if idx.size == 0:
            continue
        beta = float(shape[k])
        span = span_of(float(delta[idx].max()) * k_cells)
        table = _unit_table(beta, span)  # shared by calls (nodes, sites) of alike reach
        step = span / (2 * TABLE_STEPS)
        out[idx, 1:] = _grouped_pass(beta, table, step, u_age[idx], delta[idx], weeks)
    return out


def _renewal_table(beta: float, umax: float) -> tuple[FloatArray, float]:
    """M of a unit-scale Weibull tabulated on TABLE_STEPS + 2 steps up to umax, and the step."""
    curve = weibull_renewal(beta, 1.0, umax * 1.0001, RENEWAL_GRID)
    step = umax * 1.0001 / TABLE_STEPS
    return curve.at(np.arange(TABLE_STEPS + 2) * step), step


def _class_sums(
    beta: float, u_age: FloatArray, delta: FloatArray, w: FloatArray, key: IntArray, weeks: int
) -> tuple[IntArray, FloatArray, FloatArray]:
    """(keys, sum of w F_a at the week ends, sum of w dF_a per cell) per distinct key."""
    m = CELLS_PER_WEEK
    edges = np.arange(weeks * m + 1, dtype=np.float64)
    ends = np.arange(1, weeks + 1) * m
    order = np.argsort(key, kind="stable")  # rows of a key side by side: sums by reduceat
    keys, inv = np.unique(key, return_inverse=True)
    inv = inv.ravel()[order]
    f_end = np.zeros((keys.size, weeks))
    d_f = np.zeros((keys.size, weeks * m))
    for lo in range(0, order.size, CHUNK):
        rows = order[lo : lo + CHUNK]
        a, d = u_age[rows][:, None], delta[rows][:, None]
        f_a = w[rows][:, None] * -np.expm1(
            -(np.power(a + d * edges[None, :], beta) - np.power(a, beta))
        )
        part = inv[lo : lo + CHUNK]
        starts = np.flatnonzero(np.r_[True, part[1:] != part[:-1]])
        f_end[part[starts]] += np.add.reduceat(f_a[:, ends], starts, axis=0)
        d_f[part[starts]] += np.add.reduceat(np.diff(f_a, axis=1), starts, axis=0)
    return keys, f_end, d_f


def weekly_cumulative_totals(
    shape: FloatArray,
    type_index: IntArray,
    scale_h: FloatArray,
    age_h: FloatArray,
    rate_h_per_week: FloatArray,
    weeks: int,
    *,
    weight: FloatArray,
    label: IntArray,
    labels: int,
) -> FloatArray:
    """Sum of weight x N_a at week boundaries 0..weeks per label (labels, weeks + 1).

    weekly_cumulative's grid and sums, added up before the convolution: N_a = F_a +
    (dF_a * M) is linear in F_a, and positions of one lamp-type row and one cell width
    read the same M at the same lags, so each such class (per label) takes one FFT
    convolution of its summed dF_a instead of one per position.
    """
    m = CELLS_PER_WEEK
    out = np.zeros((labels, weeks + 1))
    if age_h.size == 0 or weeks <= 0:
        return out
    delta = rate_h_per_week / (m * scale_h)
    u_age = age_h / scale_h
    lags = np.arange(weeks * m, dtype=np.float64) + 0.5
    ends = np.arange(1, weeks + 1) * m
    size = next_fast_len(2 * weeks * m - 1, real=True)
    for k in np.unique(type_index).tolist():
        idx = np.nonzero((type_index == k) & (delta > 0))[0]
        if idx.size == 0:
            continue
        beta = float(shape[k])
        table, step = _renewal_table(beta, float(delta[idx].max()) * weeks * m)
        widths, cls = np.unique(delta[idx], return_inverse=True)
        key = cls.ravel().astype(np.int64) * labels + label[idx]
        keys, f_end, d_f = _class_sums(beta, u_age[idx], delta[idx], weight[idx], key, weeks)
        m_lag = _read_linear(table, widths[keys // labels][:, None] * lags[None, :] / step)
        conv = np.fft.irfft(
            np.fft.rfft(d_f, size, axis=1) * np.fft.rfft(m_lag, size, axis=1), size, axis=1
        )
        np.add.at(out[:, 1:], keys % labels, f_end + np.maximum(conv[:, ends - 1], 0.0))
    return out


def weekly_increments(cum: FloatArray) -> FloatArray:
    """Per-week replacement probabilities from cumulative expected replacements (n, H+1)."""
    return np.clip(np.diff(cum, axis=1), 0.0, 1.0)


def cumulative_with_group(
    before: FloatArray, after_new: FloatArray, group_week: IntArray
) -> FloatArray:
    """Cumulative expected spot replacements at week boundaries 0..H with a group relamp.

    before[j, t]: N_a(t weeks) of the lamp in place now; after_new[j, s]: M(s weeks) of a
    new lamp; group_week[j]: the week the group relamp puts a new lamp in (>= H: none).
    Up to the relamp the current lamp's curve; afterwards its value then plus M since.
    """
    h1 = before.shape[1]
    t = np.arange(h1)[None, :]
    g = np.minimum(group_week, h1 - 1)[:, None]
    has = (group_week < h1 - 1)[:, None]
    at_g = np.take_along_axis(before, g, axis=1)
    since = np.clip(t - g, 0, h1 - 1)
    after = at_g + np.take_along_axis(after_new, since, axis=1)
    return np.where(has & (t > g), after, before)


def dark_spot_lamps(dark: NDArray[np.bool_], group_week: IntArray) -> NDArray[np.bool_]:
    """Dark positions needing a spot lamp now: not those a first-week group relamp relamps."""
    return np.asarray(dark, dtype=bool) & (np.asarray(group_week) != 0)


SMALL = 2_000_000  # keep per-position node probabilities while K x n x columns is below


@dataclass(frozen=True)
class NodeDemand:
    """One lamp type's spot demand at the Gauss-Hermite nodes of its uncertain scale.

    weekly: moment sums (K, H) of the weekly probabilities; lead: of the clipped cumulative
    from now to each week boundary (K, H + 1); for small groups (the exact mixture) the
    probabilities of both at the distinct position rows (K, u, columns), `weight` positions
    each (None: one each), None otherwise.
    """

    n: int
    weekly: mx.Moments
    lead: mx.Moments
    p_weekly: FloatArray | None
    p_lead: FloatArray | None
    weight: FloatArray | None = None

    def weights(self) -> FloatArray:
        """Positions per kept row (ones when every row is one position)."""
        rows = 0 if self.p_lead is None else self.p_lead.shape[1]
        return self.weight if self.weight is not None else np.ones(rows)

    def merge(self, other: NodeDemand) -> NodeDemand:
        """The same lamp type's positions from another site (the scale error is shared)."""

        def add(a: mx.Moments, b: mx.Moments) -> mx.Moments:
            return mx.Moments(a.mean + b.mean, a.var + b.var, a.third + b.third)

        n = self.n + other.n
        both = self.p_lead is not None and other.p_lead is not None
        ok = both and n * int(self.lead.mean.shape[1]) < SMALL

        def cat(a: FloatArray | None, b: FloatArray | None) -> FloatArray | None:
            return (
                np.concatenate([a, b], axis=1) if ok and a is not None and b is not None else None
            )

        weight = np.concatenate([self.weights(), other.weights()]) if ok else None
        return NodeDemand(
            n,
            add(self.weekly, other.weekly),
            add(self.lead, other.lead),
            cat(self.p_weekly, other.p_weekly),
            cat(self.p_lead, other.p_lead),
            weight,
        )


def pmf_repeated(p: FloatArray, weight: FloatArray, kmax: int) -> FloatArray:
    """Poisson-binomial pmf over 0..kmax per (fine point, column) of rows repeated weight
    times (p: (F, u, C), weight: (u,) integer counts): (F, C, kmax + 1).

    By the characteristic function, prod_i (1 - p_i + p_i e^{-i theta})^{w_i} at L > kmax
    points theta = 2 pi l / L, then the inverse DFT [Fernandez & Williams 2010; Hong 2013,
    as reliability.poisson_binomial.pmf_dft]: mass beyond L - 1 would fold back, and past
    kmax the caller's support (mixture.support_max: 12 sd) leaves a negligible tail. Each
    factor's log in real arithmetic: |z|^2 = 1 - 2 p q (1 - cos theta), arg z = atan2(-p sin
    theta, q + p cos theta); summed times w_i (any branch gives z^w for an integer w).
    """
    f, u, c = p.shape
    size = next_fast_len(kmax + 1, real=True)
    theta = 2.0 * np.pi * np.arange(size // 2 + 1) / size
    cos, sin = np.cos(theta), np.sin(theta)
    out = np.empty((f, c, kmax + 1))
    block = max(1, 1_000_000 // (f * theta.size))  # rows per step (memory: f x rows x L)
    with np.errstate(divide="ignore"):  # z = 0 (p = 1/2 at theta = pi): the product is 0
        for col in range(c):
            re = np.zeros((f, theta.size))
            im = np.zeros((f, theta.size))
            for lo in range(0, u, block):
                pc = p[:, lo : lo + block, col, None]
                wb = weight[lo : lo + block]
                q = 1.0 - pc
                re += 0.5 * (np.log1p(-2.0 * pc * q * (1.0 - cos)) * wb[:, None]).sum(axis=1)
                im += (np.arctan2(-pc * sin, q + pc * cos) * wb[:, None]).sum(axis=1)
            cf = np.exp(re) * (np.cos(im) + 1j * np.sin(im))
            out[:, col] = np.fft.irfft(cf, size, axis=1)[:, : kmax + 1]
    return np.maximum(out, 0.0)


def mixed(m: mx.Moments, nd: NodeDemand, p: FloatArray | None) -> mx.Mixture:
    """mixture.mixture of nd's count over these columns (m: (K, C), p: nd's rows (K, u, C)),
    its exact branch by pmf_repeated when rows repeat (a fixture's lamps, an area's set)."""
    r = mx.rule()
    w = nd.weights()
    # As mixture.mixture: the same support, budget and fine grid; distinct rows only.
    mean = np.einsum("k,k...->...", r.w, m.mean)
    fine = m.to_fine(r) if r.z.size > 1 else m
    kmax = mx.support_max(fine, nd.n)
    if p is None or not mx.exact_is_cheap(nd.n, r.z_fine.size * m.mean.shape[1], kmax):
        return mx.Mixture(mean, nd.n, "rna", fine=fine, w_fine=r.w_fine)  # as mx.mixture's
    if p.shape[1] * 4 > nd.n:  # few repeats: the positions' own recursion
        return mx.mixture(m, nd.n, r, np.repeat(p, w.astype(np.int64), axis=1))
    pf = mx.to_fine_p(p, r) if r.z.size > 1 else p
    pmf = pmf_repeated(pf, w, kmax)
    return mx.Mixture(mean, nd.n, "exact", pmf=np.einsum("f,f...->...", r.w_fine, pmf))


def _after_new(
    shape: FloatArray, k: IntArray, rate_over_scale: FloatArray, weeks: int
) -> FloatArray:
    """M(t / eta) at the week boundaries of a new lamp, per position (n, weeks + 1).

    Alike positions (one lamp-type row, one burn rate over scale) share the curve: each
    distinct one is read once.
    """
    out = np.zeros((k.size, weeks + 1))
    steps = np.arange(weeks + 1, dtype=float)[None, :]
    for kk in np.unique(k).tolist():
        sel = np.nonzero(k == kk)[0]
        rates, inv = np.unique(rate_over_scale[sel], return_inverse=True)
        u = rates[:, None] * steps
        curve = renewal_reaching(float(shape[kk]), float(u.max()))
        out[sel] = curve.at(u)[inv.ravel()]
    return out


def _node_cumulative(
    shape: FloatArray,
    k: IntArray,
    scale_h: FloatArray,
    age_h: FloatArray,
    rate_h_per_week: FloatArray,
    weeks: int,
    group_week: IntArray,
) -> FloatArray:
    """Cumulative spot replacements (n, weeks + 1) with the group relamps, at one scale."""
    cum = weekly_cumulative(shape, k, scale_h, age_h, rate_h_per_week, weeks)
    g = np.nonzero(group_week < weeks)[0]
    if g.size:
        after = _after_new(shape, k[g], rate_h_per_week[g] / scale_h[g], weeks)
        cum[g] = cumulative_with_group(cum[g], after, group_week[g])
    return cum


def unique_rows(keys: NDArray[np.float64]) -> tuple[NDArray[np.float64], NDArray[np.intp]]:
    """np.unique(keys, axis=0, return_inverse=True) by one lexsort: same rows, same order.

    Rows sort column by column (the first column first), as np.unique's structured view
    compares them, at a fraction of its cost for a few hundred thousand rows.
    """
    n = keys.shape[0]
    order = np.lexsort(keys.T[::-1])
    ordered = keys[order]
    new = np.ones(n, dtype=bool)
    new[1:] = np.any(ordered[1:] != ordered[:-1], axis=1)
    member = np.empty(n, dtype=np.intp)
    member[order] = np.cumsum(new) - 1
    return ordered[new], member


def _weighted_moments(p: FloatArray, w: FloatArray) -> mx.Moments:
    """mx.Moments.of of rows repeated w times (p: (K, u, C), w: (u,) counts): (K, C) sums."""
    q = 1.0 - p
    v = p * q
    e = "kuc,u->kc"
    return mx.Moments(np.einsum(e, p, w), np.einsum(e, v, w), np.einsum(e, v * (q - p), w))


def node_demand(
    shape: FloatArray,
    k: IntArray,
    scale_h: FloatArray,
    age_h: FloatArray,
    rate_h_per_week: FloatArray,
    weeks: int,
    group_week: IntArray,
    sd_ln_scale: FloatArray,
    label: IntArray,
) -> dict[int, NodeDemand]:
    """Per label (lamp type) the spot demand at each node of the lognormal scale (see
    node_passes)."""
    cols = (shape, k, scale_h, age_h, rate_h_per_week, weeks, group_week, sd_ln_scale, label)
    return node_passes(*cols)[0]


def node_passes(
    shape: FloatArray,
    k: IntArray,
    scale_h: FloatArray,
    age_h: FloatArray,
    rate_h_per_week: FloatArray,
    weeks: int,
    group_week: IntArray,
    sd_ln_scale: FloatArray,
    label: IntArray,
) -> tuple[dict[int, NodeDemand], FloatArray | None]:
    """Per label (lamp type) the spot demand at each node of the lognormal scale, and the
    cumulative (n, weeks + 1) at the nominal scale (the node z = 0 of an odd rule; None
    without one): the same curves as the nominal pass would give, not computed twice.

    sd_ln_scale per position (its lamp type's); at node z every scale is eta e^{sd z}, and
    the one pass (weekly_cumulative) and the new-lamp curves after a group relamp are
    evaluated there: NODES passes. Positions alike in every input (a fixture's lamps, an
    area put in at one relamp) share their curves: each distinct row is computed once.
    """
    r = mx.rule()
    cols = [label, k, scale_h, age_h, rate_h_per_week, group_week, sd_ln_scale]
    rows, member = unique_rows(np.column_stack(cols).astype(np.float64))
    u_k, u_gw = rows[:, 1].astype(np.int64), rows[:, 5].astype(np.int64)
    p_w = np.empty((r.z.size, rows.shape[0], weeks))  # (node, distinct row, week)
    p_l = np.empty((r.z.size, rows.shape[0], weeks + 1))  # from now to each boundary
    nominal: FloatArray | None = None
    for i, z in enumerate(r.z.tolist()):
        sc = rows[:, 2] * np.exp(rows[:, 6] * z)
        cum = _node_cumulative(shape, u_k, sc, rows[:, 3], rows[:, 4], weeks, u_gw)
        if z == 0.0:
            nominal = cum[member]  # every position's, before the clip below
        p_w[i] = weekly_increments(cum)
        np.clip(cum, 0.0, 1.0, out=p_l[i])  # cum[:, 0] = 0
    # Rows sort by label first: each label's distinct rows are one slice of them.
    weight = np.bincount(member, minlength=rows.shape[0]).astype(np.float64)
    labels, starts, counts = np.unique(
        rows[:, 0].astype(np.int64), return_index=True, return_counts=True
    )
    n_of = np.bincount(np.searchsorted(labels, label), minlength=labels.size)
    out: dict[int, NodeDemand] = {}
    for g in range(labels.size):
        j = slice(int(starts[g]), int(starts[g] + counts[g]))
        mw, ml = _weighted_moments(p_w[:, j], weight[j]), _weighted_moments(p_l[:, j], weight[j])
        if int(n_of[g]) * r.z.size * (weeks + 1) < SMALL:  # the distinct rows, weighted
            keep = (p_w[:, j].copy(), p_l[:, j].copy(), weight[j].copy())
            out[int(labels[g])] = NodeDemand(int(n_of[g]), mw, ml, *keep)
        else:
            out[int(labels[g])] = NodeDemand(int(n_of[g]), mw, ml, None, None)
    return out, nominal


def lead_quantile(nd: NodeDemand, lead: int, level: float) -> int:
    """Level quantile of spot lamps from now to week boundary `lead`, mixed over the scale."""
    if lead <= 0:
        return 0
    p = nd.p_lead[:, :, lead : lead + 1] if nd.p_lead is not None else None
    col = mx.Moments(
        nd.lead.mean[:, lead : lead + 1],
        nd.lead.var[:, lead : lead + 1],
        nd.lead.third[:, lead : lead + 1],
    )
    return int(mixed(col, nd, p).quantile(level)[0])


def lead_mean(nd: NodeDemand, lead: int) -> float:
    """Mean spot lamps from now to week boundary `lead`, over the scale's nodes."""
    if lead <= 0:
        return 0.0
    return float(mx.rule().w @ nd.lead.mean[:, lead])


@dataclass(frozen=True)
class WeekDemand:
    """One group of positions' weekly demand (arrays over weeks)."""

    spot_mean: FloatArray
    spot_var: FloatArray
    spot_quantile: IntArray
    group: IntArray
    breakage: FloatArray
    method: str

    @property
    def total_mean(self) -> FloatArray:
        """Mean lamps needed per week: spot, group and breakage."""
        return self.spot_mean + self.group + self.breakage


def week_demand(
    p: FloatArray,
    group: IntArray,
    level: float,
    breakage_fraction: float,
    dark_now: int = 0,
    spread: NodeDemand | None = None,
) -> WeekDemand:
    """A group's weekly demand from its positions' weekly probabilities p (n, H).

    dark_now: positions dark today, each needing a lamp in the first week (counted as
    certain spot demand). Breakage: a fraction of the lamps handled (common practice).
    """
    h = p.shape[1]
    mean = p.sum(axis=0)
    var = (p * (1.0 - p)).sum(axis=0)
    method = "exact" if p.shape[0] <= EXACT_MAX else "normal"
    if spread is not None and h:  # the mixture over the lamp type's uncertain scale
        mix = mixed(spread.weekly, spread, spread.p_weekly)
        r = mx.rule()
        mean = mix.mean.copy()
        var = r.w @ spread.weekly.var + r.w @ (spread.weekly.mean**2) - mean**2
        q = mix.quantile(level)
        method = f"mixture ({mix.method})"
    elif method == "exact":  # every week in one pass (pmf_weeks)
        q = quantiles_exact(p, level) if p.shape[0] else np.zeros(h, dtype=np.int64)
    else:
        q = np.array(
            [quantile_normal(float(mean[i]), float(var[i]), level, p.shape[0]) for i in range(h)],
            dtype=np.int64,
        )
    mean = mean.copy()
    if h:
        mean[0] += dark_now
        q[0] += dark_now
    breakage = breakage_fraction * (mean + group)
    return WeekDemand(mean, var, q, group.astype(np.int64), breakage, method)
