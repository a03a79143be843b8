"""The array steps of mixture_batch: many items' exact pmfs, mixture CDFs, bins and sums.

Each function does for many mixtures what reliability/mixture.py does for one, with the
same formulas and the same choices, so that each item's numbers are those of
mixture.Mixture (up to floating-point summation order):

- exact_pmfs: mixture.pmf_truncated over the columns of many items at once, each item's
  probabilities zero-padded to the longest (a p = 0 step multiplies by 1 and adds 0) and
  truncated at the deepest support (the recursion at count k reads counts <= k only);
- rna_binned_cdfs: Mixture._fine_cdf_at for many items, their fine rows and bin edges
  padded into blocks of alike length; Poisson-regime rows get only their running sum (the
  refined-normal values there are overwritten in mixture.py as well);
- quantiles: Mixture.quantile's bisection, every item in step.
The bins, their totals and the convolution of lamp types: mixture_batch_bins.py.
"""

from __future__ import annotations

import math
from collections.abc import Sequence

import numpy as np
from numpy.typing import NDArray
from scipy.special import gammaln, ndtr

from service.reliability import mixture as mx

FloatArray = NDArray[np.float64]
IntArray = NDArray[np.int64]

_BLOCK_CELLS = 1 << 20  # (jobs x fine rows x edges) per refined-normal block: bounded memory


def items_by_selection(sel: IntArray, n_sel: int) -> list[IntArray]:
    """Each selection's item indices, ascending."""
    order = np.argsort(sel, kind="stable")
    bounds = np.searchsorted(sel[order], np.arange(n_sel + 1))
    return [order[bounds[s] : bounds[s + 1]] for s in range(n_sel)]


def _classes(sizes: IntArray, ratio: float = 1.25) -> list[IntArray]:
    """Indices grouped by size, each group's sizes within `ratio` of its smallest."""
    order = np.argsort(sizes, kind="stable")
    out: list[IntArray] = []
    start = 0
    s = sizes[order]
    while start < order.size:
        stop = int(np.searchsorted(s, max(s[start] * ratio, s[start] + 8), side="right"))
        out.append(order[start:stop])
        start = stop
    return out


def exact_pmfs(
    p: FloatArray,
    starts: IntArray,
    n: IntArray,
    kmax: IntArray,
    exact: NDArray[np.bool_],
    r: mx.Rule,
) -> list[FloatArray | None]:
    """The mixed (1, kmax + 1) pmf of every exact column (None for the others).

    p: (K, sum n) node probabilities of the columns back to back, starts: each one's first.
    """
    out: list[FloatArray | None] = [None] * int(n.size)
    cols = np.nonzero(exact)[0]
    if not cols.size:
        return out
    f = r.z_fine.size
    for part in _classes(n[cols], 2.0):
        cc = cols[part]
        nb, kb = int(n[cc].max()), int(kmax[cc].max())
        take = np.concatenate([np.arange(starts[c], starts[c] + n[c]) for c in cc.tolist()])
        pf = mx.to_fine_p(p[:, take][:, :, None], r)[:, :, 0] if r.z.size > 1 else p[:, take]
        padded = np.zeros((nb, cc.size * f))
        at = 0
        for j, c in enumerate(cc.tolist()):
            padded[: n[c], j * f : (j + 1) * f] = pf[:, at : at + n[c]].T
            at += int(n[c])
        pmf = mx.pmf_truncated(padded, kb)
        for j, c in enumerate(cc.tolist()):
            block = np.ascontiguousarray(pmf[j * f : (j + 1) * f, : kmax[c] + 1])
            out[c] = np.einsum("f,f...->...", r.w_fine, block.reshape(f, 1, -1))
    return out


_C = 6.0 * math.sqrt(2 * math.pi)
_PHI_ONE = 8.5  # scipy.special.ndtr(x) == 1.0 exactly from x = 8.2924 on
_PHI_LOW = -12.0  # ndtr(-12) = 1.8e-33


def _rna_rows(k: FloatArray, mu: FloatArray, var: FloatArray, third: FloatArray) -> FloatArray:
    """mixture.rna_cdf(k, Moments(mu, var, third), poisson=False) for rows (R, M) of counts
    with one (mu, var, third) per row: the same operations in the same order, the per-row
    ones (sd, skewness) once per row and the element-wise ones in place.

    Phi(x) is evaluated only on -12 <= x < 8.5: above, scipy's ndtr is exactly 1.0 (checked
    on a fine grid to x = 60); below, Phi(x) < 1.8e-33 is left out of the sum, which moves
    a CDF by less than 1e-32, far inside the quantile search's 1e-12 tolerance.
    """
    sd = np.sqrt(np.maximum(var, 1e-200))  # sd^3 stays a normal float
    gamma = (third / sd**3)[:, None]
    x = k + 0.5
    x -= mu[:, None]
    x /= sd[:, None]
    x2 = x * x
    g = np.multiply(x2, -0.5)
    np.exp(g, out=g)
    np.subtract(1.0, x2, out=x2)
    x2 *= gamma
    g *= x2  # gamma (1 - x^2) exp(-x^2 / 2), the refinement's term
    g /= _C
    mid = (x >= _PHI_LOW) & (x < _PHI_ONE)
    g[mid] += ndtr(x[mid])
    g[x >= _PHI_ONE] += 1.0
    np.clip(g, 0.0, 1.0, out=g)
    flat = var <= 1e-12  # no spread: the step at the mean
    if flat.any():
        g[flat] = (k[flat] + 1e-9 >= mu[flat][:, None]).astype(np.float64)
    return g


def _poisson_settled(lm: FloatArray) -> int:
    """A count past which every row's running Poisson sum no longer changes, exactly.

    Past the mean the pmf falls with k; once it is below 2^-55 (log below -38.1) and the
    sum is at least 1/2 (true past the mean: the median is above mean - ln 2), adding it
    rounds back to the same float, and so does every later, smaller term. k = mean + 12 sd
    + 40 is checked to be there; a row that is not (none expected) keeps the full length.
    """
    k = np.ceil(lm + 12.0 * np.sqrt(lm) + 40.0)
    log_pmf = k * np.log(lm) - lm - gammaln(k + 1.0)
    if not bool(np.all(log_pmf < -40.0)):
        return 1 << 62
    return int(k.max())


def _poisson_rows(lm: FloatArray, top: int) -> FloatArray:
    """Running sums of the Poisson pmf at each row's mean over 0..top (mixture.py's own)."""
    ks = np.arange(top + 1, dtype=np.float64)
    log_pmf = ks[None, :] * np.log(lm[:, None]) - lm[:, None] - gammaln(ks + 1.0)[None, :]
    return np.cumsum(np.exp(log_pmf), axis=1)


def _fill_poisson(
    g: FloatArray, regime: NDArray[np.bool_], mu: FloatArray, pad: FloatArray
) -> None:
    """g's Poisson-regime rows (J, F, M): each row's running Poisson sum at its job's edges."""
    jj, ff = np.nonzero(regime)  # row-major: each job's rows are consecutive
    lm = mu[regime]
    top = min(int(pad.max()), _poisson_settled(lm))
    cdf_p = _poisson_rows(lm, max(top, 0))
    bounds = np.searchsorted(jj, np.arange(g.shape[0] + 1))
    for i in np.unique(jj).tolist():
        b0, b1 = int(bounds[i]), int(bounds[i + 1])
        idx = pad[i].astype(np.int64)
        vals = cdf_p[b0:b1][:, np.clip(idx, 0, top)]
        vals[:, idx < 0] = 0.0
        g[i, ff[b0:b1]] = vals


def _block_cdfs(
    fine: list[mx.Moments], edges: list[FloatArray], w_fine: FloatArray
) -> list[FloatArray]:
    """Mixture._fine_cdf_at for jobs of one fine-grid size, edges padded to the longest."""
    j, m = len(edges), max(e.size for e in edges)
    pad = np.stack([np.concatenate((e, np.full(m - e.size, e[-1]))) for e in edges])  # (J, M)
    mu, var, third = (
        np.stack([getattr(x, a)[:, 0] for x in fine]) for a in ("mean", "var", "third")
    )
    regime = mx.poisson_regime(mu, var) & (var > 1e-12) & (pad[:, -1:] >= 0)  # (J, F)
    g = np.empty((j, mu.shape[1], m))
    rest = ~regime
    if rest.any():
        jj = np.nonzero(rest)[0]
        g[rest] = _rna_rows(pad[jj], mu[rest], var[rest], third[rest])
    if regime.any():
        _fill_poisson(g, regime, mu, pad)
    cdf = np.einsum("f,jfm->jm", w_fine, g)
    return [cdf[i, : e.size] for i, e in enumerate(edges)]


def rna_binned_cdfs(
    jobs: Sequence[tuple[mx.Mixture, FloatArray]],
) -> list[FloatArray]:
    """Mixture._fine_cdf_at(edges, 0) of every (refined-normal mixture, edges) job."""
    out: list[FloatArray] = [np.zeros(0)] * len(jobs)
    by_f: dict[int, list[int]] = {}
    for i, (mix, _) in enumerate(jobs):
        assert mix.fine is not None
        by_f.setdefault(int(mix.fine.mean.shape[0]), []).append(i)
    for ids in by_f.values():
        idx = np.array(ids, dtype=np.int64)
        sizes = np.array([jobs[i][1].size for i in ids], dtype=np.int64)
        f = int(jobs[ids[0]][0].fine.mean.shape[0])  # type: ignore[union-attr]
        for part in _classes(sizes):
            per = max(1, _BLOCK_CELLS // (f * int(sizes[part].max())))
            for c0 in range(0, part.size, per):
                sub = idx[part[c0 : c0 + per]].tolist()
                mixes = [jobs[i][0] for i in sub]
                fine = [m.fine for m in mixes if m.fine is not None]
                w = mixes[0].w_fine
                assert w is not None
                cdfs = _block_cdfs(fine, [jobs[i][1] for i in sub], w)
                for i, c in zip(sub, cdfs, strict=True):
                    out[i] = c
    return out


def quantiles(mixtures: Sequence[mx.Mixture], level: float) -> IntArray:
    """Mixture.quantile(level)[0] of each single-column mixture, the bisections in step."""
    out = np.zeros(len(mixtures), dtype=np.int64)
    rna = [i for i, m in enumerate(mixtures) if m.pmf is None]
    for i, m in enumerate(mixtures):
        if m.pmf is not None:
            out[i] = int(m.quantile(level)[0])
    by_f: dict[int, list[int]] = {}
    for i in rna:
        f = mixtures[i].fine
        assert f is not None
        by_f.setdefault(int(f.mean.shape[0]), []).append(i)
    for ids in by_f.values():
        out[ids] = _bisect([mixtures[i] for i in ids], level)
    return out


def _bisect(mixtures: list[mx.Mixture], level: float) -> IntArray:
    """Bisection of the refined-normal mixture CDFs (one fine-grid size), all at once."""
    fine = [m.fine for m in mixtures if m.fine is not None]
    mu, var, third = (
        np.stack([getattr(x, a)[:, 0] for x in fine]) for a in ("mean", "var", "third")
    )
    w = mixtures[0].w_fine
    assert w is not None
    lo = np.full(len(mixtures), -1, dtype=np.int64)
    hi = np.array([m.n for m in mixtures], dtype=np.int64)
    while np.any(hi - lo > 1):
        act = np.nonzero(hi - lo > 1)[0]
        mid = (lo[act] + hi[act]) // 2
        rows = mx.Moments(mu[act], var[act], third[act])
        g = mx.rna_cdf(mid.astype(np.float64)[:, None], rows)
        ok = np.einsum("f,jf->j", w, g) >= level - 1e-12
        hi[act] = np.where(ok, mid, hi[act])
        lo[act] = np.where(ok, lo[act], mid)
    return hi
