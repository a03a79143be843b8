"""LED lumen maintenance projection by the IES TM-21-11 method [published: IES TM-21-11].

Input: the averaged lumen maintenance series of an LM-80-style test, flux normalised to 1.0
at 0 h, against burn hours.

1. Data window: points before 1,000 h are ignored. Test duration D = last test time.
   D < 6,000 h: not projectable (ValueError). 6,000 h <= D <= 10,000 h: the last 5,000 h
   (points with t >= D - 5,000 h). D > 10,000 h: the last half, starting from the data point
   nearest to D / 2 (on a tie, the earlier point).
2. Least-squares fit of ln(Phi) = ln(B) - alpha t over the window.
3. L_p = ln(100 B / p) / alpha in hours for p in percent (L70: p = 70). alpha <= 0 means the
   light is not falling: no finite projection (None).
4. Reporting cap: 6 x D for a sample of 20 or more units; 5.5 x D for 10-19 units ([memory]:
   recalled, not looked up); fewer than 10 units: not projectable (ValueError). A projection
   beyond the cap is written "L70(6k) > 36,000 h", otherwise "L70(6k) = 31,200 h" where 6k is
   D in thousands of hours. Displayed values are rounded to 3 significant figures (our display
   choice); the raw value stays in `projections`.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass, replace

import numpy as np
from numpy.typing import ArrayLike

from service.reliability.lumen import LumenCurve, exponential_curve

MIN_FIT_START_H = 1_000.0  # hours: earlier data ignored
MIN_DURATION_H = 6_000.0  # hours: shorter tests are not projectable
LONG_TEST_H = 10_000.0  # hours: above this, use the last half of the data
SHORT_WINDOW_H = 5_000.0  # hours: window for 6,000-10,000 h tests
CAP_MULTIPLE_LARGE = 6.0  # sample of 20 or more units
CAP_MULTIPLE_SMALL = 5.5  # sample of 10-19 units [memory]
_TOL_H = 1e-6  # hours: floating-point tolerance on window edges


@dataclass(frozen=True)
class TM21Result:
    """Fit and projections of one TM-21 calculation (hours throughout)."""

    B: float  # fitted initial constant (dimensionless)
    alpha: float  # decay rate per hour
    test_duration_h: float
    window_start_h: float  # first test time used in the fit
    points_used: int
    sample_size: int
    cap_h: float  # largest projection that may be reported
    projections: dict[int, float | None]  # raw L_p in hours; None when alpha <= 0
    reported: dict[int, str]
    capped: dict[int, bool]

    def lumen_curve(self) -> LumenCurve:
        """The fitted exponential as a lumen curve, held at the reporting cap beyond it."""
        curve = exponential_lumen_curve(self.B, max(self.alpha, 0.0))
        return replace(curve, valid_to_h=self.cap_h)

    def life_label(self, percent: int = 70) -> str:
        """The reported lumen life, e.g. "L70(10k) > 60,000 h" when beyond the cap."""
        return self.reported[percent]


def cap_multiple(sample_size: int) -> float:
    """Multiple of the test duration a projection may be reported up to."""
    if sample_size >= 20:
        return CAP_MULTIPLE_LARGE
    if sample_size >= 10:
        return CAP_MULTIPLE_SMALL  # [memory]
    raise ValueError("TM-21 projection needs a sample of at least 10 units")


def fit_window(hours: ArrayLike) -> tuple[float, float]:
    """(test duration, first hour of the fit window) for a series of test times in hours."""
    t = np.asarray(hours, dtype=np.float64)
    duration = float(t[-1])
    if duration < MIN_DURATION_H:
        raise ValueError(
            f"test duration {duration:,.0f} h is under {MIN_DURATION_H:,.0f} h: not projectable"
        )
    if duration <= LONG_TEST_H:
        start = duration - SHORT_WINDOW_H
    else:
        eligible = t[t >= MIN_FIT_START_H]
        start = float(eligible[int(np.argmin(np.abs(eligible - duration / 2.0)))])
    return duration, max(start, MIN_FIT_START_H)


def _fmt_k(duration_h: float) -> str:
    return f"{duration_h / 1000.0:.1f}".rstrip("0").rstrip(".") + "k"


def _round_sig(x: float, sig: int = 3) -> float:
    if x <= 0:
        return 0.0
    return round(x, sig - 1 - math.floor(math.log10(x)))


def format_projection(
    percent: int, value_h: float | None, duration_h: float, cap_h: float
) -> tuple[str, bool]:
    """Reported text for one projection and whether it was capped."""
    head = f"L{percent}({_fmt_k(duration_h)})"
    if value_h is None or value_h > cap_h:
        return f"{head} > {cap_h:,.0f} h", True
    return f"{head} = {_round_sig(value_h):,.0f} h", False


def tm21_projection(
    hours: ArrayLike,
    normalised_flux: ArrayLike,
    *,
    sample_size: int = 20,
    percents: Sequence[int] = (70, 80, 90),
) -> TM21Result:
    """Project lumen maintenance life L_p (hours) from averaged, normalised test data."""
    t = np.asarray(hours, dtype=np.float64)
    phi = np.asarray(normalised_flux, dtype=np.float64)
    if t.ndim != 1 or t.shape != phi.shape or t.size < 2:
        raise ValueError("hours and flux must be 1-D series of the same length (>= 2 points)")
    if not (np.all(np.isfinite(t)) and np.all(np.isfinite(phi))):
        raise ValueError("hours and flux must be finite")
    if np.any(np.diff(t) <= 0) or t[0] < 0:
        raise ValueError("test hours must be non-negative and strictly increasing")
    if np.any(phi <= 0):
        raise ValueError("normalised flux must be positive")
    for p in percents:
        if not 0 < p < 100:
            raise ValueError("lumen maintenance percents must lie in (0, 100)")
    multiple = cap_multiple(sample_size)
    duration, start = fit_window(t)
    use = t >= start - _TOL_H
    if int(use.sum()) < 2:
        raise ValueError("fewer than two data points in the TM-21 fit window")
    tw = t[use]
    yw = np.log(phi[use])
    # Least squares on ln(Phi) = ln(B) - alpha t (closed form, centred for accuracy).
    tm = tw.mean()
    slope = float(np.sum((tw - tm) * (yw - yw.mean())) / np.sum((tw - tm) ** 2))
    intercept = float(yw.mean() - slope * tm)
    B = math.exp(intercept)
    alpha = -slope
    cap_h = multiple * duration

    projections: dict[int, float | None] = {}
    reported: dict[int, str] = {}
    capped: dict[int, bool] = {}
    for p in percents:
        value = math.log(100.0 * B / p) / alpha if alpha > 0 else None
        projections[p] = value
        reported[p], capped[p] = format_projection(p, value, duration, cap_h)
    return TM21Result(
        B=B,
        alpha=alpha,
        test_duration_h=duration,
        window_start_h=float(tw[0]),
        points_used=int(tw.size),
        sample_size=sample_size,
        cap_h=cap_h,
        projections=projections,
        reported=reported,
        capped=capped,
    )


def exponential_lumen_curve(B: float, alpha: float) -> LumenCurve:
    """LED depreciation curve B*exp(-alpha*t) from a TM-21 fit (hours basis, exact form)."""
    return exponential_curve(
        min(B, 1.2), alpha, assumed=False, source="TM-21 exponential fit of test data"
    )
