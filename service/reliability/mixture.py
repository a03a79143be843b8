"""Counts whose event probabilities share an uncertain life-curve scale: the mixture.

All positions of a lamp type share its Weibull scale eta, known only as a lognormal
ln eta ~ N(ln eta_hat, sigma^2). Given eta the count is Poisson-binomial; unconditionally it
is the MIXTURE P(K <= k) = E_Z[P(K <= k | eta_hat e^{sigma Z})], Z standard normal, which is
skewed when sigma beta is large (at the catalogue prior, sigma = 0.246 and beta = 3, the
count's spread is about 0.74 of its mean, and a normal interval undercovers).

1. The per-position probabilities are evaluated at NODES Gauss-Hermite nodes z_k of the
   standard normal (numpy.polynomial.hermite_e.hermegauss, weights w_k / sqrt(2 pi))
   [published: Abramowitz & Stegun 25.4.46; the probabilists' Hermite rule is exact for
   E[P(Z)] with P a polynomial of degree < 2 NODES]. The mean count E[sum p] is the
   quadrature sum_k w_k sum_j p_j(z_k).
2. The conditional CDF P(K <= k | z) is a near step in z for a large fleet (its width in z
   is the event spread over the parameter spread), far sharper than the node spacing, so
   the CDF is NOT averaged at the nodes themselves: the smooth quantities (log cumulative
   hazard of each position's probability, or a large group's moment sums) are carried from
   the nodes to a FINE uniform z grid by the nodes' interpolating polynomial (Lagrange), and
   the mixture CDF is the normal-weighted sum over the fine grid.
3. At each fine point the Poisson-binomial CDF is exact (the Bernoulli-by-Bernoulli
   recursion, truncated where the tail is below 1e-12) when that is cheap, else the
   refined normal approximation (RNA) G(x) = Phi(x) + gamma (1 - x^2) phi(x) / 6 at
   x = (k + 0.5 - mu) / sd, gamma = sum p(1-p)(1-2p) / sd^3 [published: Volkova 1996,
   "A refinement of the central limit theorem for sums of independent random indicators",
   Theory Probab. Appl. 40(4); Hong 2013, Comput. Stat. Data Anal. 59, sec. 3.3]; where
   the mean is below POISSON_BELOW from many small chances, the Poisson CDF (Le Cam).
4. The quantile is the smallest integer k with the mixture CDF >= level, by bisection.

Only what the callers know is mixed: the scale always; the shape where a field fit gives
its bounds (an outer SHAPE_NODES-point Gauss-Hermite sum over ln beta, scale-shape
correlation 0, the fits not keeping it).
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from functools import lru_cache
from typing import Any

import numpy as np
from numpy.polynomial.hermite_e import hermegauss
from numpy.typing import NDArray
from scipy.signal import fftconvolve

# Small contractions by einsum, not BLAS (@, tensordot): on a loaded machine the BLAS
# threads made a 121 x 171 weighted sum cost tens of milliseconds.
from scipy.special import gammaln, ndtr, pdtr

FloatArray = NDArray[np.float64]
IntArray = NDArray[np.int64]

NODES = 9  # Gauss-Hermite nodes where per-position probabilities are evaluated
SHAPE_NODES = 5  # outer nodes over ln beta, where the shape is uncertain too
FINE = 121  # uniform z points (between the outer nodes) for the mixture CDF
EXACT_BUDGET = 1.0e8  # recursion cells (positions x columns x support) below which exact
TAIL = 1e-12
MAX_BINS = 4096  # a type's count pmf is binned beyond this many values (convolution)
POISSON_BELOW = 30.0  # mean below which many small chances count as Poisson
_P_MIN = 1e-300


@dataclass(frozen=True)
class Rule:
    """Gauss-Hermite nodes and weights (summing to 1), the fine grid and the interpolation."""

    z: FloatArray  # (K,)
    w: FloatArray  # (K,)
    z_fine: FloatArray  # (F,)
    w_fine: FloatArray  # (F,)
    lagrange: FloatArray  # (F, K): values at z -> values at z_fine


@lru_cache(maxsize=8)
def gauss_hermite(n: int = NODES) -> tuple[FloatArray, FloatArray]:
    """Nodes and weights of E[f(Z)], Z ~ N(0, 1): sum_k w_k f(z_k) (weights sum to 1)."""
    z, w = hermegauss(n)
    return z.astype(np.float64), (w / w.sum()).astype(np.float64)


def lagrange_matrix(z: FloatArray, x: FloatArray) -> FloatArray:
    """(len(x), len(z)): row i holds the Lagrange basis polynomials of the nodes z at x_i."""
    diff = x[:, None] - z[None, :]
    out = np.ones((x.size, z.size))
    for k in range(z.size):
        others = np.delete(np.arange(z.size), k)
        out[:, k] = np.prod(diff[:, others], axis=1) / np.prod(z[k] - z[others])
    return out


@lru_cache(maxsize=8)
def rule(n: int = NODES, fine: int = FINE) -> Rule:
    """The quadrature rule, its fine grid over the nodes' span and the interpolation matrix
    (cached: its arrays are never written to)."""
    z, w = gauss_hermite(n)
    if n == 1:
        return Rule(z, w, z.copy(), w.copy(), np.ones((1, 1)))
    zf = np.linspace(z[0], z[-1], fine)
    wf = np.exp(-0.5 * zf * zf)
    wf /= wf.sum()
    return Rule(z, w, zf, wf, lagrange_matrix(z, zf))


def lognormal_multipliers(sigma: float | FloatArray, z: FloatArray) -> FloatArray:
    """exp(sigma z): the scale's multiplier at each node (sigma per group: (groups, K))."""
    return np.exp(np.multiply.outer(np.asarray(sigma, dtype=np.float64), z))


def to_fine_p(p_nodes: FloatArray, r: Rule) -> FloatArray:
    """Per-position probabilities (K, ...) at the nodes -> (F, ...) on the fine grid.

    Interpolated as ln(-ln(1 - p)), the log cumulative hazard, which is linear in z for a
    Weibull window from age 0 (ln H = beta ln(t / eta)) and smooth in general.
    """
    p = np.clip(p_nodes, _P_MIN, 1.0 - 1e-15)
    g = np.log(-np.log1p(-p))
    gf = np.clip(np.einsum("fk,k...->f...", r.lagrange, g), g.min(axis=0), g.max(axis=0))
    return -np.expm1(-np.exp(np.minimum(gf, 50.0)))


@dataclass(frozen=True)
class Moments:
    """Sums over positions per column: mean, variance and third cumulant of the count."""

    mean: FloatArray
    var: FloatArray
    third: FloatArray

    @classmethod
    def of(cls, p: FloatArray) -> Moments:
        """Moment sums over axis -2 (positions) of probabilities p (..., n, C)."""
        q = 1.0 - p
        v = p * q
        return cls(p.sum(axis=-2), v.sum(axis=-2), (v * (q - p)).sum(axis=-2))

    def to_fine(self, r: Rule) -> Moments:
        """Node moment sums (K, C) -> fine grid (F, C): log mean and variance, raw skewness."""
        lm = np.log(np.maximum(self.mean, _P_MIN))
        lv = np.log(np.maximum(self.var, _P_MIN))
        skew = self.third / np.maximum(self.var, 1e-200) ** 1.5

        # The interpolant held within the nodes' own range (no overshoot where a sum
        # vanishes at some nodes, e.g. no chance of failing within the horizon).
        def carry(v: FloatArray) -> FloatArray:
            out = np.einsum("fk,k...->f...", r.lagrange, v)
            return np.asarray(np.clip(out, v.min(axis=0), v.max(axis=0)), dtype=np.float64)

        mean = np.exp(carry(lm))
        var = np.exp(carry(lv))
        return Moments(mean, var, carry(skew) * var**1.5)


def poisson_regime(mean: FloatArray, var: FloatArray) -> NDArray[np.bool_]:
    """Few expected events from many small chances (sum p^2 = mean - var small)."""
    return np.asarray((mean < POISSON_BELOW) & (mean - var <= 0.1 * mean) & (mean > 0))


def rna_cdf(k: FloatArray, m: Moments, poisson: bool = True) -> FloatArray:
    """Refined normal approximation of P(K <= k), broadcast over m's columns."""
    shape = np.broadcast_shapes(np.shape(k), m.mean.shape)
    kk, mu, var = (np.broadcast_to(x, shape) for x in (k, m.mean, m.var))
    sd = np.sqrt(np.maximum(var, 1e-200))  # sd^3 stays a normal float
    x = (kk + 0.5 - mu) / sd
    gamma = np.broadcast_to(m.third, shape) / sd**3
    g = ndtr(x) + gamma * (1.0 - x * x) * np.exp(-0.5 * x * x) / (6.0 * math.sqrt(2 * math.pi))
    out = np.clip(g, 0.0, 1.0)
    # Few expected events from many small chances (sum p^2 = mean - var small): the Poisson
    # limit is the better refinement there [Le Cam 1960: total variation <= sum p^2].
    regime = poisson_regime(mu, var) if poisson else np.zeros(shape, dtype=bool)
    if regime.any():
        kp = kk[regime]
        out[regime] = np.where(kp >= 0, pdtr(np.maximum(kp, 0.0), mu[regime]), 0.0)
    return np.where(var > 1e-12, out, (kk + 1e-9 >= mu).astype(np.float64))


def support_max(m: Moments, n: int) -> int:
    """An upper count beyond which every column's tail is negligible (at most n)."""
    if m.mean.size == 0:
        return 0
    top = float(np.max(m.mean + 12.0 * np.sqrt(m.var))) + 12.0
    return int(min(n, math.ceil(top))) if math.isfinite(top) else n


def pmf_truncated(p: FloatArray, kmax: int) -> FloatArray:
    """Poisson-binomial pmf over 0..kmax per column (p: (n, C)), Bernoulli by Bernoulli.

    P_j(k) = P_{j-1}(k)(1 - p_j) + P_{j-1}(k-1) p_j (textbook recursion); mass above kmax
    is dropped (the caller picks kmax with a negligible tail).
    """
    n, c = p.shape
    out = np.zeros((c, kmax + 1))
    out[:, 0] = 1.0
    for j in range(n):
        pj = p[j][:, None]
        top = min(j + 1, kmax)
        head = out[:, :top].copy()
        out[:, : top + 1] *= 1.0 - pj
        out[:, 1 : top + 1] += head * pj
    return out


def exact_is_cheap(n: int, columns: int, kmax: int, budget: float = EXACT_BUDGET) -> bool:
    """Whether the truncated recursion over these columns stays within the budget."""
    return n * columns * (kmax + 1) <= budget


@dataclass(frozen=True)
class _RnaColumns:
    """rna_cdf's parts that do not depend on k, computed once for a quantile's bisection."""

    mean: FloatArray
    var: FloatArray
    sd: FloatArray
    gamma: FloatArray
    regime: NDArray[np.bool_]

    @classmethod
    def of(cls, m: Moments) -> _RnaColumns:
        """The fine moments' sd, skewness factor and Poisson regime (as rna_cdf forms them)."""
        sd = np.sqrt(np.maximum(m.var, 1e-200))
        return cls(m.mean, m.var, sd, m.third / sd**3, poisson_regime(m.mean, m.var))

    def cdf(self, k: IntArray, cols: IntArray) -> FloatArray:
        """rna_cdf(k[None, :], the columns cols of m) (F, len(cols)), the same arithmetic."""
        mu, var = self.mean[:, cols], self.var[:, cols]
        kk = np.broadcast_to(np.asarray(k, dtype=np.float64)[None, :], mu.shape)
        x = (kk + 0.5 - mu) / self.sd[:, cols]
        gamma = self.gamma[:, cols]
        g = ndtr(x) + gamma * (1.0 - x * x) * np.exp(-0.5 * x * x) / (6.0 * math.sqrt(2 * math.pi))
        out = np.clip(g, 0.0, 1.0)
        regime = self.regime[:, cols]
        if regime.any():
            kp = kk[regime]
            out[regime] = np.where(kp >= 0, pdtr(np.maximum(kp, 0.0), mu[regime]), 0.0)
        return np.where(var > 1e-12, out, (kk + 1e-9 >= mu).astype(np.float64))


@dataclass(frozen=True)
class Mixture:
    """The mixture distribution of a count per column (weeks, or one horizon).

    Exact: `pmf` (C, kmax + 1) already mixed over the fine grid. Otherwise the fine grid's
    moment sums (F, C) and the RNA CDF at each fine point.
    """

    mean: FloatArray  # (C,) E[count], the Gauss-Hermite quadrature over the nodes
    n: int
    method: str
    pmf: FloatArray | None = None
    fine: Moments | None = None
    w_fine: FloatArray | None = None

    def cdf(self, k: NDArray[Any]) -> FloatArray:
        """P(K <= k) per column (k: (C,) or (C, m) integers)."""
        kk = np.asarray(k, dtype=np.float64)
        if self.pmf is not None:
            cdf = np.cumsum(self.pmf, axis=1)
            idx = np.clip(kk, -1, cdf.shape[1] - 1).astype(np.int64)
            col = np.arange(cdf.shape[0]).reshape((-1,) + (1,) * (idx.ndim - 1))
            out = np.where(idx >= 0, cdf[col, np.maximum(idx, 0)], 0.0)
            return np.asarray(out, dtype=np.float64)
        assert self.fine is not None and self.w_fine is not None
        f = self.fine
        extra = (1,) * (kk.ndim - 1)
        shaped = Moments(
            *(x.reshape(x.shape + extra) for x in (f.mean, f.var, f.third))
        )  # (F, C, ...)
        g = rna_cdf(kk[None, ...], shaped)
        return np.asarray(np.einsum("f,f...->...", self.w_fine, g), dtype=np.float64)

    def quantile(self, level: float) -> IntArray:
        """Per column the smallest integer k with P(K <= k) >= level (bisection)."""
        c = self.mean.size
        target = level - 1e-12
        if self.pmf is not None:  # a non-decreasing cumsum: the bisection's k, read directly
            cdf = np.cumsum(self.pmf, axis=1)
            first = np.array([np.searchsorted(cdf[i], target) for i in range(c)], dtype=np.int64)
            return np.where(first >= cdf.shape[1], self.n, np.minimum(first, self.n))
        assert self.fine is not None
        # Beyond 12 sd (+ 12) of every fine point the CDF is 0 or 1 to far below 1e-12:
        # the bisection's steps out there are decided without evaluating it (same path).
        mu, sd = self.fine.mean, np.sqrt(np.maximum(self.fine.var, 0.0))
        below = np.floor(np.min(mu - 12.0 * sd, axis=0)) - 12.0  # (C,) cdf < level under
        above = np.ceil(np.max(mu + 12.0 * sd, axis=0)) + 12.0  # cdf >= level at and over
        lo = np.full(c, -1, dtype=np.int64)  # cdf(lo) < level (cdf(-1) = 0)
        hi = np.full(c, self.n, dtype=np.int64)  # cdf(hi) = 1 >= level
        at = _RnaColumns.of(self.fine)
        while np.any(hi - lo > 1):
            mid = (lo + hi) // 2
            ok = mid >= above
            need = np.nonzero((hi - lo > 1) & (mid > below) & ~ok)[0]
            if need.size:
                ok[need] = self._mix(at.cdf(mid[need], need)) >= target
            hi = np.where(ok, mid, hi)
            lo = np.where(ok, lo, mid)
        return hi

    def _mix(self, g: FloatArray) -> FloatArray:
        """The fine points' CDFs (F, ...) weighted into the mixture's (as cdf)."""
        assert self.w_fine is not None
        return np.asarray(np.einsum("f,f...->...", self.w_fine, g), dtype=np.float64)

    def span(self, col: int = 0) -> tuple[int, int]:
        """(lo, hi): the counts carrying one column's mass (tails below ~1e-12 left out)."""
        if self.pmf is not None:
            return 0, self.pmf.shape[1] - 1
        assert self.fine is not None
        mu, sd = self.fine.mean[:, col], np.sqrt(self.fine.var[:, col])
        lo = int(max(0, math.floor(float(np.min(mu - 12 * sd)) - 12)))
        hi = int(min(self.n, math.ceil(float(np.max(mu + 12 * sd)) + 12)))
        return lo, hi

    def binned(self, lo: int, width: int, bins: int, col: int = 0) -> FloatArray:
        """P(lo + i width <= K < lo + (i + 1) width) for i < bins (width 1: the pmf)."""
        edges = lo - 1 + width * np.arange(bins + 1, dtype=np.float64)
        if self.pmf is not None:
            cdf = self.cdf(np.broadcast_to(edges, (self.mean.size, edges.size)))[col]
        else:
            cdf = self._fine_cdf_at(edges, col)
        cdf[-1] = max(cdf[-1], 1.0) if edges[-1] >= self.span(col)[1] else cdf[-1]
        return np.maximum(np.diff(np.maximum.accumulate(cdf)), 0.0)

    def _fine_cdf_at(self, edges: FloatArray, col: int) -> FloatArray:
        """The mixture CDF of one column at many counts: RNA at each fine point, and where
        the Poisson limit applies its CDF by a running sum of the pmf (no incomplete gamma
        per count)."""
        assert self.fine is not None and self.w_fine is not None
        mu, var, third = (
            x[:, col][:, None] for x in (self.fine.mean, self.fine.var, self.fine.third)
        )
        g = rna_cdf(edges[None, :], Moments(mu, var, third), poisson=False)
        regime = poisson_regime(mu[:, 0], var[:, 0]) & (var[:, 0] > 1e-12)
        if regime.any() and edges[-1] >= 0:
            top = int(edges[-1])
            ks = np.arange(top + 1, dtype=np.float64)
            lm = mu[regime, 0][:, None]
            log_pmf = ks[None, :] * np.log(lm) - lm - gammaln(ks + 1.0)[None, :]
            cdf_p = np.cumsum(np.exp(log_pmf), axis=1)
            idx = edges.astype(np.int64)
            g[regime] = np.where(idx[None, :] >= 0, cdf_p[:, np.maximum(idx, 0)], 0.0)
        return np.asarray(np.einsum("f,fm->m", self.w_fine, g), dtype=np.float64)


def mixture(
    node_moments: Moments,
    n: int,
    r: Rule,
    p_nodes: FloatArray | None = None,
    budget: float = EXACT_BUDGET,
) -> Mixture:
    """The mixture over the nodes' uncertain scale of a Poisson-binomial count per column.

    node_moments: (K, C) sums at the rule's nodes; p_nodes (K, n, C): the per-position
    probabilities, given when the group is small enough to try the exact recursion.
    """
    mean = np.einsum("k,k...->...", r.w, node_moments.mean)
    fine = node_moments.to_fine(r) if r.z.size > 1 else node_moments
    if p_nodes is not None:
        kmax = support_max(fine, n)
        cols = r.z_fine.size * node_moments.mean.shape[1]
        if exact_is_cheap(n, cols, kmax, budget):
            pf = to_fine_p(p_nodes, r) if r.z.size > 1 else p_nodes
            f, _, c = pf.shape
            flat = np.moveaxis(pf, 0, 1).reshape(n, f * c)  # columns (fine point, column)
            pmf = pmf_truncated(flat, kmax).reshape(f, c, kmax + 1)
            mixed = np.einsum("f,f...->...", r.w_fine, pmf)
            return Mixture(mean, n, "exact", pmf=mixed)
    return Mixture(mean, n, "rna", fine=fine, w_fine=r.w_fine)


def convolve(parts: list[tuple[int, FloatArray]]) -> tuple[int, FloatArray]:
    """(offset, pmf) of a sum of independent counts given as (offset, pmf) each."""
    off, pmf = 0, np.ones(1)
    for o, q in parts:
        off += o
        pmf = np.maximum(
            fftconvolve(pmf, q) if min(pmf.size, q.size) > 64 else np.convolve(pmf, q), 0.0
        )
    total = pmf.sum()
    return off, pmf / total if total > 0 else pmf


def quantile_of(offset: int, pmf: FloatArray, level: float, width: int = 1, parts: int = 1) -> int:
    """Smallest k with P(K <= k) >= level for a pmf starting at `offset` in bins of `width`.

    Binned (width > 1, a sum of `parts` binned counts): the bin's middle, within
    width x parts / 2 of the count.
    """
    cdf = np.cumsum(pmf)
    i = min(int(np.searchsorted(cdf, level - 1e-12)), pmf.size - 1)
    return offset + i * width + ((width - 1) * parts) // 2
