"""The bins of mixture_batch: each selection's lamp types binned, convolved, and its range.

uncertainty._binned_total and quantile_of for many selections at once, with the same spans,
bin width (the widest type's span over mixture.MAX_BINS), bin edges, weights of the outer
shape nodes, convolution and quantiles:

- the refined-normal CDFs at every item's bin edges come from one batched evaluation
  (mixture_batch_cdf.rna_binned_cdfs), the exact items' from their own pmf;
- convolve_many is mixture.convolve for many selections, each step's FFT products batched
  by transform length (scipy.fft over rows gives fftconvolve's numbers row by row).
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray
from scipy import fft as sp_fft

from service.reliability import mixture as mx
from service.reliability.mixture_batch_cdf import rna_binned_cdfs

FloatArray = NDArray[np.float64]
IntArray = NDArray[np.int64]

_DIRECT_MAX = 64  # mixture.convolve: np.convolve when the shorter pmf has at most this many


def finish_binned(cdf: FloatArray, edges: FloatArray, span_hi: int) -> FloatArray:
    """Mixture.binned's last steps: the top edge's mass completed, differences of the CDF."""
    cdf = cdf.copy()
    cdf[-1] = max(cdf[-1], 1.0) if edges[-1] >= span_hi else cdf[-1]
    return np.maximum(np.diff(np.maximum.accumulate(cdf)), 0.0)


def convolve_many(parts: Sequence[Sequence[FloatArray]]) -> list[FloatArray]:
    """mixture.convolve's pmf (offsets aside) of each selection's independent parts."""
    acc = [np.maximum(np.convolve(np.ones(1), p[0]), 0.0) for p in parts]
    steps = max((len(p) for p in parts), default=0)
    for t in range(1, steps):
        fft_jobs: dict[int, list[int]] = {}
        for s, p in enumerate(parts):
            if len(p) <= t:
                continue
            if min(acc[s].size, p[t].size) > _DIRECT_MAX:
                n_fft = sp_fft.next_fast_len(acc[s].size + p[t].size - 1, True)
                fft_jobs.setdefault(n_fft, []).append(s)
            else:
                acc[s] = np.maximum(np.convolve(acc[s], p[t]), 0.0)
        for n_fft, sels in fft_jobs.items():
            a = _rows([acc[s] for s in sels], n_fft)
            b = _rows([parts[s][t] for s in sels], n_fft)
            prod = sp_fft.rfft(a, n=n_fft, axis=-1) * sp_fft.rfft(b, n=n_fft, axis=-1)
            full = sp_fft.irfft(prod, n=n_fft, axis=-1)
            for i, s in enumerate(sels):
                size = acc[s].size + parts[s][t].size - 1
                acc[s] = np.maximum(full[i, :size].copy(), 0.0)
    out = []
    for pmf in acc:
        total = pmf.sum()
        out.append(pmf / total if total > 0 else pmf)
    return out


def _rows(arrays: list[FloatArray], width: int) -> FloatArray:
    out = np.zeros((len(arrays), width))
    for i, a in enumerate(arrays):
        out[i, : a.size] = a
    return out


Item = tuple[int, float, mx.Mixture, IntArray]  # (group, outer weight, mixture, its span)


def binned_quantiles(selections: Sequence[Sequence[Item]], tail: float) -> list[tuple[int, int]]:
    """uncertainty._binned_total and its two quantiles for each selection of items.

    Each selection: its items, grouped by group, in order.
    """
    plans = [_plan(items) for items in selections]
    jobs = [
        (m, e) for plan in plans for g in plan.groups for _, m, e, _ in g.items if m.pmf is None
    ]
    cdfs = iter(rna_binned_cdfs(jobs))
    parts: list[list[FloatArray]] = []
    for plan in plans:
        sel_parts = []
        for g in plan.groups:
            total: FloatArray | int = 0
            for w, m, edges, hi in g.items:
                if m.pmf is None:
                    b = finish_binned(next(cdfs), edges, hi)
                else:
                    b = m.binned(g.lo, plan.width, g.bins)
                total = total + w * b
            sel_parts.append(np.asarray(total, dtype=np.float64))
        parts.append(sel_parts)
    out = []
    for plan, pmf in zip(plans, convolve_many(parts), strict=True):
        k = len(plan.groups)
        out.append(
            (
                mx.quantile_of(plan.offset, pmf, tail, plan.width, k),
                mx.quantile_of(plan.offset, pmf, 1.0 - tail, plan.width, k),
            )
        )
    return out


@dataclass(frozen=True)
class _Group:
    lo: int
    bins: int
    items: list[tuple[float, mx.Mixture, FloatArray, int]]  # (weight, mixture, edges, span top)


@dataclass(frozen=True)
class _Plan:
    offset: int
    width: int
    groups: list[_Group]


def _plan(items: Sequence[Item]) -> _Plan:
    """Each group's span, bins and edges and the common bin width, as _binned_total."""
    groups: dict[int, list[tuple[float, mx.Mixture, tuple[int, int]]]] = {}
    for g, w, m, span in items:
        groups.setdefault(g, []).append((w, m, (int(span[0]), int(span[1]))))
    widest = max(
        max(s[1] for _, _, s in t) - min(s[0] for _, _, s in t) + 1 for t in groups.values()
    )
    width = max(1, math.ceil(widest / mx.MAX_BINS))
    out = []
    for t in groups.values():
        lo, hi = min(s[0] for _, _, s in t), max(s[1] for _, _, s in t)
        bins = (hi - lo) // width + 1
        edges = lo - 1 + width * np.arange(bins + 1, dtype=np.float64)
        out.append(_Group(lo, bins, [(w, m, edges, s[1]) for w, m, s in t]))
    return _Plan(sum(g.lo for g in out), width, out)
