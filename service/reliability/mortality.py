"""Weibull shape (and scale) from a maker's mortality curve: points (% of rated life, % surviving).

Method [textbook Weibull probability plot: Abernethy, *The New Weibull Handbook*, ch. 2 and 5;
Nelson, *Applied Life Data Analysis*, ch. 3]. S(t) = exp(-(t/eta)^beta) gives

    ln(-ln S) = beta ln t - beta ln eta,

a straight line in x = ln t, y = ln(-ln S). Ordinary least squares of y on x (rank regression
on Y, "RRY"), all in closed form with numpy (no loop, no iteration):

    Sxx = sum (x - xbar)^2,  Sxy = sum (x - xbar)(y - ybar),  Syy = sum (y - ybar)^2
    beta = Sxy / Sxx,   a = ybar - beta xbar,   eta_curve = exp(-a / beta)
    R^2  = Sxy^2 / (Sxx Syy)   (1 when there are only two points)

Times are t = (% of rated life / 100) x rated life hours, so eta_curve comes out in hours. The
residuals are reported on the plot (ln(-ln S) units, root mean square) and as survival
(fitted minus read % surviving at each point, in percentage points).

Scale rule (which eta the forecasts use). A maker's curve gives both a shape and a scale, but
the rated life L_p (hours by which p % have failed, B50 by default) is the maker's headline
figure, while the curve is usually a smoothed chart read by eye. So:
- the points set the SHAPE: the slope beta of the probability plot. A curve drawn on the wrong
  time scale (a constant factor k on every t, say a chart for another cycle or lamp length)
  only shifts the line by beta ln k, so its slope, the shape, is still right;
- the rated life sets the SCALE: eta = L_p / (-ln(1 - p/100))^(1/beta) (weibull.py), with the
  fitted beta. The curve's own eta_curve and its own B_p life, eta_curve (-ln(1 - p))^(1/beta),
  are reported beside it with the relative disagreement B_p(curve) / L_p - 1; beyond
  DISAGREEMENT_WARN a warning says the curve and the rated life disagree.

Valid input: at least 2 points, % of rated life > 0 with at least 2 different values, % surviving
strictly inside (0, 100) (ln(-ln S) is infinite at 0 and 100), and survival falling with burn
hours (beta > 0). Shapes above MAX_SHAPE are refused: no lamp wears out that abruptly, and such a
slope comes from points read too close together.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike, NDArray

from service.reliability.weibull import Weibull, scale_from_rated_life

FloatArray = NDArray[np.float64]

DISAGREEMENT_WARN = 0.10  # warn when the curve's own B_p life is > 10 % from the rated life
# Shapes below this are not lamp wear-out (and would overflow the scale): refused.
MIN_SHAPE = 0.1
MAX_SHAPE = 50.0  # the catalogue's own upper limit on a Weibull shape


@dataclass(frozen=True)
class MortalityFit:
    """A Weibull fitted to mortality points; `weibull` is the one to use (rated-life scale)."""

    shape: float  # beta, the slope of the probability plot
    scale_h: float  # eta from the rated life and beta (the scale the forecasts use), hours
    curve_scale_h: float  # eta fitted from the points alone, hours
    rated_life_h: float  # L_p, burn hours
    rated_percentile: float  # p, percent failed at the rated life
    curve_life_h: float  # the curve's own B_p life, hours
    life_disagreement: float  # curve_life_h / rated_life_h - 1
    intercept: float  # a in ln(-ln S) = beta ln t + a, t in hours
    r_squared: float
    rms_residual: float  # root mean square residual on the plot, ln(-ln S) units
    pct_rated_life: tuple[float, ...]  # the points, as given (sorted by x)
    pct_surviving: tuple[float, ...]
    fitted_pct_surviving: tuple[float, ...]  # the curve's own fit at the points, percent
    max_abs_error_pct: float  # largest |fitted - read| % surviving, percentage points
    warnings: tuple[str, ...] = ()

    @property
    def n_points(self) -> int:
        """Number of points fitted."""
        return len(self.pct_rated_life)

    @property
    def weibull(self) -> Weibull:
        """The life law to use: fitted shape, scale from the rated life."""
        return Weibull(self.shape, self.scale_h)

    @property
    def curve_weibull(self) -> Weibull:
        """The curve's own Weibull (shape and scale both from the points)."""
        return Weibull(self.shape, self.curve_scale_h)


def _points(pct_rated_life: ArrayLike, pct_surviving: ArrayLike) -> tuple[FloatArray, FloatArray]:
    x = np.asarray(pct_rated_life, dtype=np.float64).ravel()
    s = np.asarray(pct_surviving, dtype=np.float64).ravel()
    return x, s


def _line(x: FloatArray, y: FloatArray) -> tuple[float, float, float]:
    """Least-squares slope, intercept and R^2 of y on x, closed form."""
    xm, ym = x.mean(), y.mean()
    dx, dy = x - xm, y - ym
    sxx, sxy, syy = float(dx @ dx), float(dx @ dy), float(dy @ dy)
    slope = sxy / sxx
    r2 = 1.0 if syy == 0.0 or x.size == 2 else sxy * sxy / (sxx * syy)
    return slope, float(ym - slope * xm), r2


def mortality_problem(pct_rated_life: ArrayLike, pct_surviving: ArrayLike) -> str | None:
    """Why these mortality points cannot be fitted, or None when they can."""
    x, s = _points(pct_rated_life, pct_surviving)
    if x.size != s.size:
        return "give as many % surviving values as % of rated life values"
    if x.size < 2:
        return "at least 2 mortality points are needed to fit a Weibull shape"
    if not np.all(np.isfinite(x) & (x > 0)):
        return "% of rated life must be a number > 0"
    if not np.all(np.isfinite(s) & (s > 0) & (s < 100)):
        return "% surviving must lie in (0, 100)"
    if np.unique(x).size < 2:
        return "mortality points need at least 2 different % of rated life values"
    slope, _, _ = _line(np.log(x), np.log(-np.log(s / 100.0)))
    if not (math.isfinite(slope) and slope > 0):
        return "mortality points must show survival falling with burn hours"
    if slope < MIN_SHAPE:
        return (
            f"mortality points give a Weibull shape of {slope:.3g}, below {MIN_SHAPE:g}: the "
            "curve is too flat to describe lamps that wear out"
        )
    if slope > MAX_SHAPE:
        return (
            f"mortality points give a Weibull shape of {slope:.0f}, above {MAX_SHAPE:g}: "
            "read points further apart"
        )
    return None


def fit_mortality_points(
    pct_rated_life: ArrayLike,
    pct_surviving: ArrayLike,
    rated_life_h: float,
    rated_percentile: float = 50.0,
) -> MortalityFit:
    """Weibull from mortality points: shape from the probability plot, scale from rated life."""
    problem = mortality_problem(pct_rated_life, pct_surviving)
    if problem is not None:
        raise ValueError(problem)
    if not (math.isfinite(rated_life_h) and rated_life_h > 0):
        raise ValueError("rated life must be positive hours")
    if not 0.0 < rated_percentile < 100.0:
        raise ValueError("rated percentile must lie in (0, 100)")
    x_pct, s_pct = _points(pct_rated_life, pct_surviving)
    order = np.argsort(x_pct, kind="stable")
    x_pct, s_pct = x_pct[order], s_pct[order]
    t_h = x_pct / 100.0 * rated_life_h
    x, y = np.log(t_h), np.log(-np.log(s_pct / 100.0))
    beta, a, r2 = _line(x, y)
    eta_curve = math.exp(-a / beta)
    resid = y - (beta * x + a)
    fitted = 100.0 * np.exp(-np.power(t_h / eta_curve, beta))
    p = rated_percentile / 100.0
    curve_life = eta_curve * (-math.log1p(-p)) ** (1.0 / beta)
    disagreement = curve_life / rated_life_h - 1.0
    warnings: list[str] = []
    if abs(disagreement) > DISAGREEMENT_WARN:
        warnings.append(
            f"the mortality curve's own B{rated_percentile:g} life is {curve_life:.0f} h, "
            f"{disagreement * 100:+.0f}% from the rated life {rated_life_h:.0f} h: the rated "
            "life sets the scale, the curve only the shape"
        )
    return MortalityFit(
        shape=beta,
        scale_h=float(scale_from_rated_life(rated_life_h, beta, rated_percentile)),
        curve_scale_h=eta_curve,
        rated_life_h=float(rated_life_h),
        rated_percentile=float(rated_percentile),
        curve_life_h=curve_life,
        life_disagreement=disagreement,
        intercept=a,
        r_squared=r2,
        rms_residual=float(np.sqrt(np.mean(resid * resid))),
        pct_rated_life=tuple(float(v) for v in x_pct),
        pct_surviving=tuple(float(v) for v in s_pct),
        fitted_pct_surviving=tuple(float(v) for v in fitted),
        max_abs_error_pct=float(np.max(np.abs(fitted - s_pct))),
        warnings=tuple(warnings),
    )
