"""Age replacement [Barlow & Proschan]: each lamp is replaced at age T or at
failure, whichever comes first:

    C(T) = (c_p · S(T) + c_f · F(T)) / ∫_0^T S(t) dt,

and for a Weibull ∫_0^T S = η Γ(1 + 1/β) P(1/β, (T/η)^β) with P the regularised
lower incomplete gamma function. Run to failure costs c_f / μ.

Costs are per position, times are burn hours.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
from numpy.typing import ArrayLike, NDArray
from scipy.special import gammainc

from service.reliability.replacement import (
    DEFAULT_HORIZON_MEANS,
    MIN_REL_SAVING,
    empty_grid,
    refine_minimum,
)
from service.reliability.weibull import Weibull

FloatArray = NDArray[np.float64]


@dataclass(frozen=True, eq=False)
class AgePlan:
    """Age replacement interval (None: run to failure) and cost rates per position-hour."""

    interval_h: float | None
    cost_rate: float
    run_to_failure_rate: float  # c_failure / mean life
    saving_rate: float
    grid_t: FloatArray = field(default_factory=empty_grid)
    grid_cost: FloatArray = field(default_factory=empty_grid)


def integrated_survival(T: ArrayLike, life: Weibull) -> FloatArray:
    """∫_0^T S(t) dt in hours for a Weibull, via the regularised lower incomplete gamma."""
    tt = np.maximum(np.asarray(T, dtype=np.float64), 0.0)
    a = 1.0 / life.shape
    out: FloatArray = life.mean() * gammainc(a, np.power(tt / life.scale, life.shape))
    return out


def age_cost_rate(T: ArrayLike, life: Weibull, c_preventive: float, c_failure: float) -> FloatArray:
    """Age replacement cost per burn hour, (c_p·S(T) + c_f·F(T)) / ∫_0^T S."""
    tt = np.asarray(T, dtype=np.float64)
    if np.any(tt <= 0):
        raise ValueError("replacement ages must be positive hours")
    out: FloatArray = (c_preventive * life.sf(tt) + c_failure * life.cdf(tt)) / integrated_survival(
        tt, life
    )
    return out


def plan_age_replacement(
    life: Weibull,
    c_preventive: float,
    c_failure: float,
    *,
    max_interval_h: float | None = None,
    n: int = 2000,
) -> AgePlan:
    """Cheapest replacement age per lamp (Barlow & Proschan), or run to failure."""
    if not (c_preventive > 0 and c_failure > 0):
        raise ValueError("costs must be positive")
    mu = life.mean()
    rtf = c_failure / mu
    horizon = float(max_interval_h) if max_interval_h is not None else DEFAULT_HORIZON_MEANS * mu
    if not horizon > 0:
        raise ValueError("max_interval_h must be positive hours")
    grid_t = np.linspace(horizon / n, horizon, n)
    grid_cost = age_cost_rate(grid_t, life, c_preventive, c_failure)
    run_to_failure = AgePlan(None, rtf, rtf, 0.0, grid_t, grid_cost)
    if c_preventive >= c_failure:
        return run_to_failure  # replacing a working lamp costs as much as a failure

    k = int(np.argmin(grid_cost))
    if k == n - 1:
        return run_to_failure  # still falling at the horizon: no finite optimum

    def cost(x: float) -> float:
        return float(age_cost_rate(x, life, c_preventive, c_failure))

    lo = float(grid_t[k - 1]) if k > 0 else 0.5 * float(grid_t[0])
    x, c = refine_minimum(cost, lo, float(grid_t[k + 1]), float(grid_t[k]), float(grid_cost[k]))
    if not c < rtf * (1 - MIN_REL_SAVING):
        return run_to_failure
    return AgePlan(x, c, rtf, rtf - c, grid_t, grid_cost)
