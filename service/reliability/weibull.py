"""Two-parameter Weibull life model, vectorised over numpy arrays.

Formulas (Abernethy, *The New Weibull Handbook*; any reliability text):

- survival       S(t) = exp(-(t/eta)^beta)
- failure CDF    F(t) = 1 - S(t)
- density        f(t) = (beta/eta) (t/eta)^(beta-1) S(t)
- hazard         h(t) = (beta/eta) (t/eta)^(beta-1)
- mean           eta * Gamma(1 + 1/beta)
- percentile     t_p = eta * (-ln(1 - p))^(1/beta)       (p as a fraction)
- scale from a rated life quoted at percentile p (B50 = median):
                 eta = L_p / (-ln(1 - p))^(1/beta)
- conditional failure within a window w given survival to age a:
                 P = 1 - S(a + w) / S(a)

All times are burn hours. `shape` is beta (dimensionless), `scale` is eta (hours).
Every function broadcasts: shape and scale may be arrays (one per lamp).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike, NDArray
from scipy.special import gamma as gamma_fn

FloatArray = NDArray[np.float64]


def _arr(x: ArrayLike) -> FloatArray:
    return np.asarray(x, dtype=np.float64)


def log_sf(t: ArrayLike, shape: ArrayLike, scale: ArrayLike) -> FloatArray:
    """Natural log of the survival function, -(t/eta)^beta (t clipped at 0 hours)."""
    tt = np.maximum(_arr(t), 0.0)
    return -np.power(tt / _arr(scale), _arr(shape))


def sf(t: ArrayLike, shape: ArrayLike, scale: ArrayLike) -> FloatArray:
    """Survival S(t): share of lamps still burning at t burn hours."""
    return np.exp(log_sf(t, shape, scale))


def cdf(t: ArrayLike, shape: ArrayLike, scale: ArrayLike) -> FloatArray:
    """Failure distribution F(t) = 1 - S(t); -expm1 keeps precision for small F."""
    return -np.expm1(log_sf(t, shape, scale))


def pdf(t: ArrayLike, shape: ArrayLike, scale: ArrayLike) -> FloatArray:
    """Density f(t) per burn hour."""
    return hazard(t, shape, scale) * sf(t, shape, scale)


def hazard(t: ArrayLike, shape: ArrayLike, scale: ArrayLike) -> FloatArray:
    """Hazard rate h(t) in failures per burn hour."""
    b = _arr(shape)
    e = _arr(scale)
    tt = np.maximum(_arr(t), 0.0)
    with np.errstate(divide="ignore", invalid="ignore"):
        return (b / e) * np.power(tt / e, b - 1.0)


def mean_life(shape: ArrayLike, scale: ArrayLike) -> FloatArray:
    """Mean life in hours, eta * Gamma(1 + 1/beta)."""
    return _arr(scale) * gamma_fn(1.0 + 1.0 / _arr(shape))


def percentile(p: ArrayLike, shape: ArrayLike, scale: ArrayLike) -> FloatArray:
    """Hours by which a fraction p (0 < p < 1) of lamps has failed (B-life)."""
    return _arr(scale) * np.power(-np.log1p(-_arr(p)), 1.0 / _arr(shape))


def scale_from_rated_life(
    rated_life_h: ArrayLike, shape: ArrayLike, rated_percentile: ArrayLike = 50.0
) -> FloatArray:
    """Scale eta (hours) from a rated life quoted at a failure percentile (50 = B50)."""
    p = _arr(rated_percentile) / 100.0
    return _arr(rated_life_h) / np.power(-np.log1p(-p), 1.0 / _arr(shape))


def conditional_failure(
    age_h: ArrayLike, window_h: ArrayLike, shape: ArrayLike, scale: ArrayLike
) -> FloatArray:
    """Probability of failing within the next window_h hours given survival to age_h."""
    a = np.maximum(_arr(age_h), 0.0)
    diff = log_sf(a + _arr(window_h), shape, scale) - log_sf(a, shape, scale)
    return -np.expm1(diff)


@dataclass(frozen=True)
class Weibull:
    """A Weibull life distribution: shape beta, scale eta in burn hours."""

    shape: float
    scale: float

    def __post_init__(self) -> None:
        if not (self.shape > 0 and np.isfinite(self.shape)):
            raise ValueError("Weibull shape must be a positive finite number")
        if not (self.scale > 0 and np.isfinite(self.scale)):
            raise ValueError("Weibull scale must be a positive finite number of hours")

    @classmethod
    def from_rated_life(
        cls, rated_life_h: float, shape: float, rated_percentile: float = 50.0
    ) -> Weibull:
        """Build from a rated life (hours) at a failure percentile (B50 by default)."""
        if not 0.0 < rated_percentile < 100.0:
            raise ValueError("rated percentile must lie in (0, 100)")
        if rated_life_h <= 0:
            raise ValueError("rated life must be positive hours")
        return cls(shape, float(scale_from_rated_life(rated_life_h, shape, rated_percentile)))

    def sf(self, t: ArrayLike) -> FloatArray:
        """Survival S(t)."""
        return sf(t, self.shape, self.scale)

    def cdf(self, t: ArrayLike) -> FloatArray:
        """Failure distribution F(t)."""
        return cdf(t, self.shape, self.scale)

    def pdf(self, t: ArrayLike) -> FloatArray:
        """Density f(t)."""
        return pdf(t, self.shape, self.scale)

    def hazard(self, t: ArrayLike) -> FloatArray:
        """Hazard h(t) per burn hour."""
        return hazard(t, self.shape, self.scale)

    def mean(self) -> float:
        """Mean life in hours."""
        return float(mean_life(self.shape, self.scale))

    def variance(self) -> float:
        """Variance of life in hours squared."""
        g1 = gamma_fn(1.0 + 1.0 / self.shape)
        g2 = gamma_fn(1.0 + 2.0 / self.shape)
        return float(self.scale**2 * (g2 - g1 * g1))

    def percentile(self, p: ArrayLike) -> FloatArray:
        """B-life: hours by which fraction p has failed."""
        return percentile(p, self.shape, self.scale)

    def conditional_failure(self, age_h: ArrayLike, window_h: ArrayLike) -> FloatArray:
        """P(fail within window_h | survived to age_h)."""
        return conditional_failure(age_h, window_h, self.shape, self.scale)

    def scaled(self, life_factor: float) -> Weibull:
        """The same shape with life stretched by a factor (accelerated-failure-time scaling)."""
        return Weibull(self.shape, self.scale * life_factor)
