"""Weibull fit to a maker's mortality curve: points (% of rated life, % surviving).

Adapter kept in the catalogue package because the numeric core fits field records
(service.reliability.fitting) but has no curve fit; it is pure numpy, no database.

Method [textbook: Weibull probability plot, Abernethy, *The New Weibull Handbook*]:
S(t) = exp(-(t/eta)^beta) gives ln(-ln S) = beta ln t - beta ln eta, a straight line in
(ln t, ln(-ln S)). Least squares of y = ln(-ln S) on x = ln t gives beta (slope) and
eta = exp(-intercept / beta). Times are fractions of rated life, so eta comes out as a
fraction of rated life too.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np


@dataclass(frozen=True)
class MortalityFit:
    """Weibull shape and scale (as a fraction of rated life) fitted to mortality points."""

    shape: float
    scale_fraction: float  # eta / rated life
    n_points: int


def check_mortality_points(points: Sequence[Sequence[float]]) -> str | None:
    """Why these mortality points cannot be fitted, or None when they can."""
    if len(points) < 2:
        return "at least 2 mortality points are needed to fit a Weibull shape"
    for p in points:
        if len(p) != 2:
            return "each mortality point is [% of rated life, % surviving]"
        life_pct, surv_pct = float(p[0]), float(p[1])
        if not (math.isfinite(life_pct) and life_pct > 0):
            return "% of rated life must be a number > 0"
        if not (math.isfinite(surv_pct) and 0 < surv_pct < 100):
            return "% surviving must lie in (0, 100)"
    xs = sorted(float(p[0]) for p in points)
    if len(set(xs)) < 2:
        return "mortality points need at least 2 different % of rated life values"
    return None


def fit_mortality_points(points: Sequence[Sequence[float]]) -> MortalityFit:
    """Least-squares Weibull on the probability plot of (% rated life, % surviving) points."""
    problem = check_mortality_points(points)
    if problem is not None:
        raise ValueError(problem)
    arr = np.asarray(points, dtype=np.float64)
    x = np.log(arr[:, 0] / 100.0)  # ln(fraction of rated life)
    y = np.log(-np.log(arr[:, 1] / 100.0))  # ln(-ln S)
    slope, intercept = np.polyfit(x, y, 1)
    if not (math.isfinite(slope) and slope > 0):
        raise ValueError("mortality points must show survival falling with burn hours")
    shape = float(slope)
    return MortalityFit(shape, float(math.exp(-intercept / shape)), int(arr.shape[0]))
