"""Weibull maximum likelihood with exact, right-censored and interval-censored lamp records.

A lamp found dark at a group relamp with no burnout report failed some time between the
last visit it was known burning (lower bound L) and the visit that found it (upper bound
R); it is an interval-censored record, not a survivor. Log-likelihood terms [published:
Meeker & Escobar, *Statistical Methods for Reliability Data*, ch. 2-3 and 8]:

    exact failure at t:      ln β - β ln η + (β - 1) ln t - (t/η)^β
    right censored at t:     -(t/η)^β
    interval (L, R]:         ln(S(L) - S(R)),  S(t) = exp(-(t/η)^β)   (L = 0: left censored)

Maximised over (ln β, ln η) with scipy's L-BFGS-B from a start that treats each interval at
its midpoint; bounds are Wald intervals on the log of each parameter from a numerical
Hessian of ln L (as lifelines reports them). Records are (lower, upper) pairs in
rated-condition hours: lower == upper is an exact failure, upper = inf is right censored.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike, NDArray
from scipy.optimize import minimize
from scipy.stats import norm

from service.reliability.fitting import WeibullEstimate

FloatArray = NDArray[np.float64]


@dataclass(frozen=True)
class IntervalFit(WeibullEstimate):
    """A Weibull fitted to exact, right- and interval-censored records."""

    n_exact: int
    n_interval: int
    n_censored: int
    log_likelihood: float


def _split(lower: ArrayLike, upper: ArrayLike) -> tuple[FloatArray, FloatArray]:
    lo = np.asarray(lower, dtype=np.float64).ravel()
    hi = np.asarray(upper, dtype=np.float64).ravel()
    if lo.shape != hi.shape or lo.size == 0:
        raise ValueError("lower and upper must be non-empty and of one length")
    if np.any(~np.isfinite(lo)) or np.any(lo < 0):
        raise ValueError("lower bounds must be finite, non-negative hours")
    if np.any(np.isnan(hi)) or np.any(hi < lo):
        raise ValueError("each upper bound must be at least its lower bound")
    return lo, hi


def interval_log_likelihood(
    lower: ArrayLike, upper: ArrayLike, shape: float, scale: float
) -> float:
    """ln L of the records at (shape, scale)."""
    lo, hi = _split(lower, upper)
    return float(_loglik(np.log(shape), np.log(scale), lo, hi))


def _loglik(log_b: float, log_e: float, lo: FloatArray, hi: FloatArray) -> float:
    b, e = np.exp(log_b), np.exp(log_e)
    exact = (lo == hi) & (lo > 0)
    right = np.isinf(hi)
    inter = ~exact & ~right
    total = 0.0
    t = lo[exact]
    if t.size:
        z = t / e
        total += float(np.sum(log_b - log_e + (b - 1.0) * np.log(z) - np.power(z, b)))
    if right.any():
        total -= float(np.sum(np.power(lo[right] / e, b)))
    if inter.any():
        hl = np.power(lo[inter] / e, b)
        hr = np.power(hi[inter] / e, b)
        # ln(exp(-hl) - exp(-hr)) = -hl + ln(1 - exp(-(hr - hl))), stable for narrow intervals
        total += float(np.sum(-hl + np.log(-np.expm1(-(hr - hl)))))
    return total


def fit_interval_weibull(
    lower: ArrayLike, upper: ArrayLike, *, confidence: float = 0.90
) -> IntervalFit:
    """Weibull MLE of exact (lower == upper), interval (lower < upper) and censored records."""
    if not 0.0 < confidence < 1.0:
        raise ValueError("confidence must be between 0 and 1")
    lo, hi = _split(lower, upper)
    exact = (lo == hi) & (lo > 0)
    right = np.isinf(hi)
    inter = ~exact & ~right
    if not (exact.any() or inter.any()):
        raise ValueError("need at least one failure (exact or in an interval)")
    # Start: failures at their interval midpoints, a shape of 2, the WeiBayes scale.
    mid = np.where(right, lo, np.where(inter, 0.5 * (lo + hi), lo))
    mid = np.where(mid > 0, mid, np.where(hi > 0, hi, 1.0))
    b0 = 2.0
    e0 = float((np.sum(np.power(mid, b0)) / (exact.sum() + inter.sum())) ** (1.0 / b0))

    def neg(x: FloatArray) -> float:
        return -_loglik(float(x[0]), float(x[1]), lo, hi)

    x0 = np.array([np.log(b0), np.log(e0)])
    res = minimize(neg, x0, method="L-BFGS-B")
    res = minimize(neg, res.x, method="Nelder-Mead", options={"xatol": 1e-10, "fatol": 1e-12})
    log_b, log_e = (float(v) for v in res.x)
    cov = _covariance(neg, np.array([log_b, log_e]))
    z = float(norm.ppf(0.5 + confidence / 2.0))
    se_b = float(np.sqrt(max(cov[0, 0], 0.0)))
    se_e = float(np.sqrt(max(cov[1, 1], 0.0)))
    b, e = float(np.exp(log_b)), float(np.exp(log_e))
    return IntervalFit(
        shape=b,
        scale=e,
        shape_bounds=(b * float(np.exp(-z * se_b)), b * float(np.exp(z * se_b))),
        scale_bounds=(e * float(np.exp(-z * se_e)), e * float(np.exp(z * se_e))),
        confidence=confidence,
        n_exact=int(exact.sum()),
        n_interval=int(inter.sum()),
        n_censored=int(right.sum()),
        log_likelihood=-float(res.fun),
    )


def _covariance(f: Callable[[FloatArray], float], x: FloatArray) -> FloatArray:
    """Inverse of the numerical Hessian of -ln L at x (central differences, log parameters)."""
    h = 1e-4
    hess = np.empty((2, 2))
    for i in range(2):
        for j in range(2):
            ei = np.eye(2)[i] * h
            ej = np.eye(2)[j] * h
            hess[i, j] = (f(x + ei + ej) - f(x + ei - ej) - f(x - ei + ej) + f(x - ei - ej)) / (
                4 * h * h
            )
    try:
        return np.asarray(np.linalg.inv(hess), dtype=np.float64)
    except np.linalg.LinAlgError:
        return np.full((2, 2), np.inf)
