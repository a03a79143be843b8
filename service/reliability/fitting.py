"""Weibull fits and Kaplan-Meier estimates from field lamp records.

Each record is a lamp's burn hours and whether it burned out (a failure) or was
removed still burning / is still in service (right censored). The caller
converts hours to rated-voltage-equivalent hours with each lamp's acceleration
factor before calling; these functions treat all times alike.

Maximum likelihood with right censoring [Abernethy, *The New Weibull Handbook*;
Nelson, *Applied Life Data Analysis*], r failures, all n times t_i:

    ln L(β, η) = r ln β - rβ ln η + (β - 1) Σ_fail ln t_i - Σ_all (t_i/η)^β.

For fixed β the best η satisfies η^β = Σ_all t_i^β / r, which leaves one
monotone equation in β:

    Σ t^β ln t / Σ t^β - 1/β - (1/r) Σ_fail ln t = 0   (solved with Brent's method).

Confidence bounds use the observed Fisher information (the negative Hessian of
ln L at the estimate, analytic here) and a Wald interval on the log of each
parameter, as lifelines and the reliability package do: β·exp(±z·SE(β)/β),
z the two-sided normal quantile.

WeiBayes [Abernethy]: β fixed (from the catalogue), η = (Σ_all t_i^β / r)^(1/β).
θ = η^β is then the mean of an exponential life in "t^β" units, so the
chi-square bounds for a time-terminated exponential test apply [Nelson]:
lower θ = 2T/χ²((1+c)/2; 2r+2), upper θ = 2T/χ²((1-c)/2; 2r), T = Σ t_i^β.
With no failures Abernethy's rule "assume one failure" gives η = T^(1/β), which
is a 63.2% lower bound; we report that point estimate and a one-sided lower
bound at the requested confidence, (2T/χ²(c; 2))^(1/β), with an infinite upper
bound.

Kaplan-Meier [Kaplan & Meier 1958]: S(t) = Π_{t_j ≤ t} (1 - d_j/n_j) over the
distinct times, with Greenwood's variance of ln S, V = Σ d_j / (n_j (n_j - d_j))
(terms with n_j = d_j set to 0). Bounds use the exponential ("log-log")
Greenwood form, the default of lifelines' KaplanMeierFitter:
S^exp(±z·sqrt(V)/ln S), i.e. exp(-exp(ln(-ln S) ∓ z·sqrt(V)/ln S)); where S = 1
both bounds are 1.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike, NDArray
from scipy.optimize import brentq
from scipy.special import logsumexp
from scipy.stats import chi2, norm

FloatArray = NDArray[np.float64]
IntArray = NDArray[np.int64]


@dataclass(frozen=True)
class WeibullEstimate:
    """A Weibull estimate (shape β, scale η in hours) with its confidence bounds."""

    shape: float
    scale: float
    shape_bounds: tuple[float, float]
    scale_bounds: tuple[float, float]
    confidence: float  # two-sided, except the zero-failure WeiBayes lower bound


@dataclass(frozen=True)
class WeibullFit(WeibullEstimate):
    """A Weibull fitted to failed and right-censored records (MLE or WeiBayes)."""

    n_failures: int
    n_censored: int
    method: str  # "mle" or "weibayes"
    log_likelihood: float  # at the estimate, hours as the time unit


def _records(times_h: ArrayLike, failed: ArrayLike) -> tuple[FloatArray, NDArray[np.bool_]]:
    t = np.asarray(times_h, dtype=np.float64).ravel()
    f = np.asarray(failed, dtype=bool).ravel()
    if t.shape != f.shape:
        raise ValueError("times_h and failed must have the same length")
    if t.size == 0:
        raise ValueError("no lamp records")
    if not np.all(np.isfinite(t)) or np.any(t < 0):
        raise ValueError("times must be finite, non-negative hours")
    if np.any(t[f] <= 0):
        raise ValueError("failure times must be positive hours")
    return t, f


def _check_confidence(confidence: float) -> None:
    if not 0.0 < confidence < 1.0:
        raise ValueError("confidence must lie in (0, 1)")


def weibull_log_likelihood(
    times_h: ArrayLike, failed: ArrayLike, shape: float, scale: float
) -> float:
    """Right-censored Weibull log-likelihood (densities per hour)."""
    t, f = _records(times_h, failed)
    r = int(f.sum())
    z = np.log(t[f] / scale)
    return float(
        r * np.log(shape / scale) + (shape - 1.0) * z.sum() - np.sum(np.power(t / scale, shape))
    )


def _profile_scale(log_t: FloatArray, beta: float, r: int) -> float:
    """ln η maximising the likelihood for fixed β: η^β = Σ t^β / r (log-sum-exp for range)."""
    return float((logsumexp(beta * log_t) - np.log(r)) / beta)


def fit_weibull(times_h: ArrayLike, failed: ArrayLike, *, confidence: float = 0.90) -> WeibullFit:
    """Maximum-likelihood Weibull with right censoring and log-Wald bounds (Fisher information)."""
    _check_confidence(confidence)
    t, f = _records(times_h, failed)
    r = int(f.sum())
    if np.unique(t[f]).size < 2:
        raise ValueError("a Weibull MLE needs at least two distinct failure times")
    keep = t > 0  # a lamp censored at 0 h adds nothing to the likelihood
    log_t = np.log(t[keep])
    mean_log_fail = float(np.log(t[f]).mean())

    def score(beta: float) -> float:
        # Σ t^β ln t / Σ t^β - 1/β - mean ln t_fail; increasing in β.
        w = np.exp(beta * log_t - logsumexp(beta * log_t))
        return float(np.dot(w, log_t) - 1.0 / beta - mean_log_fail)

    lo, hi = 0.05, 5.0
    while score(lo) > 0 and lo > 1e-6:
        lo /= 4.0
    while score(hi) < 0 and hi < 1e4:
        hi *= 4.0
    if score(lo) > 0 or score(hi) < 0:
        raise ValueError("no Weibull shape between 1e-6 and 1e4 fits these records")
    beta = float(brentq(score, lo, hi, xtol=1e-12, rtol=1e-12))
    log_eta = _profile_scale(log_t, beta, r)
    eta = float(np.exp(log_eta))

    # Observed information in (β, η): negative Hessian of ln L.
    z = log_t - log_eta
    w = np.exp(beta * z)  # (t/η)^β
    sw, swz, swz2 = w.sum(), np.dot(w, z), np.dot(w, z * z)
    d_bb = -r / beta**2 - swz2
    d_ee = (beta / eta**2) * (r - (1.0 + beta) * sw)
    d_be = (-r + sw + beta * swz) / eta
    info = -np.array([[d_bb, d_be], [d_be, d_ee]])
    cov = np.linalg.inv(info)
    se_beta = float(np.sqrt(max(cov[0, 0], 0.0)))
    se_eta = float(np.sqrt(max(cov[1, 1], 0.0)))
    zq = float(norm.ppf(0.5 + confidence / 2.0))
    shape_bounds = (beta * np.exp(-zq * se_beta / beta), beta * np.exp(zq * se_beta / beta))
    scale_bounds = (eta * np.exp(-zq * se_eta / eta), eta * np.exp(zq * se_eta / eta))
    return WeibullFit(
        shape=beta,
        scale=eta,
        shape_bounds=(float(shape_bounds[0]), float(shape_bounds[1])),
        scale_bounds=(float(scale_bounds[0]), float(scale_bounds[1])),
        confidence=confidence,
        n_failures=r,
        n_censored=int(t.size - r),
        method="mle",
        log_likelihood=weibull_log_likelihood(t, f, beta, eta),
    )


def weibayes(
    times_h: ArrayLike, failed: ArrayLike, shape: float, *, confidence: float = 0.90
) -> WeibullFit:
    """WeiBayes scale for a fixed shape (Abernethy), with chi-square bounds on the scale."""
    _check_confidence(confidence)
    if not (shape > 0 and np.isfinite(shape)):
        raise ValueError("shape must be a positive finite number")
    t, f = _records(times_h, failed)
    r = int(f.sum())
    if not np.any(t > 0):
        raise ValueError("WeiBayes needs some burn hours")
    log_total = float(logsumexp(shape * np.log(t[t > 0])))  # ln Σ t^β
    if r > 0:
        eta = float(np.exp((log_total - np.log(r)) / shape))
        lo_q = chi2.ppf(0.5 + confidence / 2.0, 2 * r + 2)
        hi_q = chi2.ppf(0.5 - confidence / 2.0, 2 * r)
        scale_bounds = (
            float(np.exp((np.log(2.0) + log_total - np.log(lo_q)) / shape)),
            float(np.exp((np.log(2.0) + log_total - np.log(hi_q)) / shape)),
        )
    else:
        eta = float(np.exp(log_total / shape))  # "assume one failure"
        lo_q = chi2.ppf(confidence, 2)
        scale_bounds = (
            float(np.exp((np.log(2.0) + log_total - np.log(lo_q)) / shape)),
            float("inf"),
        )
    return WeibullFit(
        shape=float(shape),
        scale=eta,
        shape_bounds=(float(shape), float(shape)),
        scale_bounds=scale_bounds,
        confidence=confidence,
        n_failures=r,
        n_censored=int(t.size - r),
        method="weibayes",
        log_likelihood=weibull_log_likelihood(t, f, float(shape), eta),
    )


@dataclass(frozen=True, eq=False)
class KaplanMeier:
    """Kaplan-Meier survival with exponential-Greenwood bounds at each distinct time (and 0)."""

    t: FloatArray  # 0 and every distinct record time, hours
    survival: FloatArray
    lower: FloatArray
    upper: FloatArray
    at_risk: IntArray  # lamps still burning just before t
    events: IntArray  # failures at t

    def survival_at(self, t: ArrayLike) -> FloatArray:
        """Right-continuous step value of S at the given hours."""
        x = np.asarray(t, dtype=np.float64)
        idx = np.searchsorted(self.t, x, side="right") - 1
        out: FloatArray = np.where(idx < 0, 1.0, self.survival[np.maximum(idx, 0)])
        return out


def kaplan_meier(times_h: ArrayLike, failed: ArrayLike, *, confidence: float = 0.95) -> KaplanMeier:
    """Kaplan-Meier estimate with Greenwood variance and exponential (log-log) bounds."""
    _check_confidence(confidence)
    t, f = _records(times_h, failed)
    uniq, inverse = np.unique(t, return_inverse=True)
    removed = np.bincount(inverse, minlength=uniq.size)
    deaths = np.bincount(inverse, weights=f.astype(np.float64), minlength=uniq.size)
    at_risk = t.size - np.concatenate(([0], np.cumsum(removed)[:-1]))
    if uniq[0] > 0:  # start the curve at 0 hours, as lifelines does
        uniq = np.concatenate(([0.0], uniq))
        deaths = np.concatenate(([0.0], deaths))
        at_risk = np.concatenate(([t.size], at_risk))
    n = at_risk.astype(np.float64)
    surv: FloatArray = np.asarray(np.cumprod(1.0 - deaths / n), dtype=np.float64)
    with np.errstate(divide="ignore", invalid="ignore"):
        terms = np.where(n > deaths, deaths / (n * (n - deaths)), 0.0)
        var = np.cumsum(terms)
        v = np.log(surv)
        zq = float(norm.ppf(0.5 + confidence / 2.0))
        half = zq * np.sqrt(var) / v
        lower = np.exp(-np.exp(np.log(-v) - half))
        upper = np.exp(-np.exp(np.log(-v) + half))
    lower = np.where(np.isnan(lower), 1.0, lower)
    upper = np.where(np.isnan(upper), 1.0, upper)
    return KaplanMeier(
        t=uniq,
        survival=surv,
        lower=lower,
        upper=upper,
        at_risk=at_risk.astype(np.int64),
        events=deaths.astype(np.int64),
    )


@dataclass(frozen=True)
class CurveChoice:
    """Whether the field MLE replaces the catalogue curve, and why."""

    use_field: bool  # True only when the field MLE (shape and scale) replaces the catalogue
    reason: str
    method: str = "catalogue"  # "mle", "weibayes" (catalogue shape, field scale) or "catalogue"


def choose_curve(
    n_failures: int,
    fit: WeibullFit | None,
    catalogue_shape: float,
    catalogue_scale: float,
    *,
    min_failures: int = 10,
    max_shape_ratio: float = 3.0,
) -> CurveChoice:
    """Pick the life curve: field MLE, WeiBayes on the catalogue shape, or the catalogue.

    Rule: with at least `min_failures` failures and an MLE whose shape bounds are
    finite and narrower than `max_shape_ratio` (upper/lower), the field MLE
    replaces the catalogue curve (method "mle"). With 1 or more failures but not
    enough for that, keep the catalogue shape and estimate the scale from the
    field with WeiBayes (method "weibayes"; use_field is False because the shape
    stays the catalogue's). With no failures keep the catalogue curve: the
    zero-failure WeiBayes value is only a lower bound.
    """
    if catalogue_shape <= 0 or catalogue_scale <= 0:
        raise ValueError("catalogue shape and scale must be positive")
    if n_failures < 0:
        raise ValueError("n_failures must be >= 0")
    if n_failures == 0:
        return CurveChoice(False, "no field failures yet: catalogue curve kept", "catalogue")
    if n_failures >= min_failures and fit is not None and fit.method == "mle":
        lo, hi = fit.shape_bounds
        if np.isfinite(lo) and np.isfinite(hi) and lo > 0 and hi / lo < max_shape_ratio:
            return CurveChoice(
                True,
                f"{n_failures} field failures and shape bounds {lo:.2f}-{hi:.2f}: "
                "field fit replaces the catalogue curve",
                "mle",
            )
        return CurveChoice(
            False,
            f"field shape too uncertain (bounds {lo:.2f}-{hi:.2f}): "
            "catalogue shape kept, scale from field data (WeiBayes)",
            "weibayes",
        )
    return CurveChoice(
        False,
        f"only {n_failures} field failures (need {min_failures}): "
        "catalogue shape kept, scale from field data (WeiBayes)",
        "weibayes",
    )
