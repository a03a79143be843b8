"""Poisson-binomial counts: the number of independent events with probabilities p_j.

A count K = sum of independent Bernoulli(p_j) has mean sum p and variance sum p(1 - p).

- Exact (at most EXACT_MAX events): the pmf by the discrete Fourier transform of the
  characteristic function, P(K = k) = 1/(n+1) sum_l z_l exp(-i w l k),
  z_l = prod_j (1 - p_j + p_j exp(i w l)), w = 2 pi / (n + 1) [published: Fernandez &
  Williams 2010, "Closed-form expression for the Poisson-binomial probability density
  function", IEEE Trans. Aerospace and Electronic Systems 46(2); Hong 2013, Comput. Stat.
  Data Anal. 59].
- Otherwise the normal approximation with a continuity correction: the smallest k with
  Phi((k + 0.5 - mean) / sd) >= level, i.e. k = ceil(mean + z sd - 0.5) [central limit
  theorem; the half-unit correction is textbook practice for discrete counts].

Moved here from stock/demand.py (which re-exports it) so forecasts and stock share one home.
"""

from __future__ import annotations

import math

import numpy as np
from numpy.typing import NDArray
from scipy.special import ndtri

FloatArray = NDArray[np.float64]
IntArray = NDArray[np.int64]

EXACT_MAX = 400  # positions up to which the quantile is exact (DFT: O(n^2) work)


def pmf_dft(p: FloatArray) -> FloatArray:
    """Poisson-binomial pmf of sum of Bernoulli(p_j), by the DFT of its characteristic function."""
    p = np.clip(np.asarray(p, dtype=float), 0.0, 1.0)
    n = p.size
    if n == 0:
        return np.ones(1)
    w = 2.0 * np.pi / (n + 1)
    l_idx = np.arange(n + 1)
    # log of each factor, summed: a product of hundreds of complex numbers stays finite.
    factors = 1.0 - p[None, :] + p[None, :] * np.exp(1j * w * l_idx[:, None])
    z = np.exp(np.sum(np.log(factors), axis=1))
    pmf = np.fft.fft(z).real / (n + 1)
    return np.clip(pmf, 0.0, 1.0)


def quantile_exact(p: FloatArray, level: float) -> int:
    """Smallest k with P(K <= k) >= level (exact pmf)."""
    cdf = np.cumsum(pmf_dft(p))
    k = int(np.searchsorted(cdf, level - 1e-12))
    return min(k, int(p.size))


def quantile_normal(mean: float, var: float, level: float, n_max: float = math.inf) -> int:
    """Continuity-corrected normal quantile of a count, within [0, n_max]."""
    if var <= 0:
        return int(min(max(math.ceil(mean - 1e-9), 0), n_max))
    k = math.ceil(mean + float(ndtri(level)) * math.sqrt(var) - 0.5)
    return int(min(max(k, 0), n_max))


def quantile(p: FloatArray, level: float) -> tuple[int, str]:
    """The level quantile of a Poisson-binomial count and the method used."""
    if p.size <= EXACT_MAX:
        return quantile_exact(p, level), "exact"
    return quantile_normal(float(p.sum()), float((p * (1 - p)).sum()), level, p.size), "normal"


def pmf_weeks(p: FloatArray) -> FloatArray:
    """Poisson-binomial pmf of every week at once (H, n+1) from p (n, H), by convolution.

    Adds one position at a time to every week's pmf: P_j(k) = P_{j-1}(k)(1 - p_j) +
    P_{j-1}(k - 1) p_j, the pmf of a sum of independent Bernoullis (textbook recursion);
    n steps over an (H, n+1) array instead of one O(n^2) transform per week.
    """
    p = np.clip(np.asarray(p, dtype=float), 0.0, 1.0)
    n, h = p.shape
    out = np.zeros((h, n + 1))
    out[:, 0] = 1.0
    for j in range(n):
        pj = p[j][:, None]
        head = out[:, : j + 1].copy()
        out[:, : j + 1] *= 1.0 - pj
        out[:, 1 : j + 2] += head * pj
    return out


def quantiles_exact(p: FloatArray, level: float) -> IntArray:
    """Each week's smallest k with P(K <= k) >= level, exact (p: (n, H))."""
    cdf = np.cumsum(pmf_weeks(p), axis=1)
    k = np.sum(cdf < level - 1e-12, axis=1)
    return np.minimum(k, p.shape[0]).astype(np.int64)
