"""Lamp lumen depreciation (LLD): fraction of initial light against burn hours.

A curve is a list of points (x, fraction of initial lumens) with x in burn hours or in
fractions of rated life (filament lamps, whose curve stretches with the voltage-scaled life).
Between points: monotone piecewise-cubic Hermite interpolation (PCHIP, Fritsch-Carlson;
scipy.interpolate.PchipInterpolator), which never overshoots monotone data. Before the first
point: the curve starts at (0, max(1, first fraction)). Beyond the last point: a straight line
on the last segment's slope (never rising), floored at 0.

An exponential curve Phi(t) = B exp(-alpha t) (IES TM-21 form [published]) is evaluated
exactly; its points are only a sampled picture of it.

Maintained light [published: CIE 97 maintenance factor method]:
    maintained fraction = light factor (voltage) x lamp lumen depreciation x survivor fraction
(the survivor fraction applies while burnouts stay unreplaced; dirt depreciation is applied
elsewhere).

Initial lumens, when a catalogue gives none: rated watts x DEFAULT_EFFICACY_LM_PER_W for the
technology ([memory] round figures in [practice] ranges), labelled assumed wherever used.

Default curves are rough [memory] shapes fitted to the [practice] anchor figures in the
comments, and carry assumed=True so the interface can say so.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from functools import cached_property

import numpy as np
from numpy.typing import ArrayLike, NDArray
from scipy.interpolate import PchipInterpolator

from service.reliability.technologies import TECHNOLOGIES, TECHNOLOGY_DEFAULTS

FloatArray = NDArray[np.float64]

BASES: tuple[str, ...] = ("hours", "rated_life_fraction")
MAX_FRACTION = 1.2  # some lamps gain light early on; more than +20 % is a data error


@dataclass(frozen=True)
class LumenCurve:
    """Lumen maintenance curve: x (hours or rated-life fraction) against fraction of initial."""

    x: tuple[float, ...]
    fraction: tuple[float, ...]
    basis: str  # "hours" or "rated_life_fraction"
    assumed: bool
    source: str
    # Optional exact exponential form B*exp(-alpha*t), t in hours (TM-21); None = use points.
    decay_b: float | None = None
    decay_alpha: float | None = None  # per hour
    # Hours beyond which the curve is not reported (TM-21 cap): read there, it is held at its
    # value at the limit instead of extrapolated (callers flag hours past it). None = no cap.
    valid_to_h: float | None = None

    def __post_init__(self) -> None:
        if self.basis not in BASES:
            raise ValueError(f"lumen curve basis must be one of {BASES}, got {self.basis!r}")
        if len(self.x) != len(self.fraction):
            raise ValueError("lumen curve needs as many fractions as x values")
        if len(self.x) == 0:
            raise ValueError("lumen curve needs at least one point")
        xs = np.asarray(self.x, dtype=np.float64)
        fs = np.asarray(self.fraction, dtype=np.float64)
        if not (np.all(np.isfinite(xs)) and np.all(np.isfinite(fs))):
            raise ValueError("lumen curve points must be finite numbers")
        if np.any(xs < 0):
            raise ValueError("lumen curve x values (hours or rated-life fraction) must be >= 0")
        if np.any(np.diff(xs) <= 0):
            raise ValueError("lumen curve x values must be strictly increasing")
        if np.any(fs <= 0) or np.any(fs > MAX_FRACTION):
            raise ValueError(f"lumen fractions must lie in (0, {MAX_FRACTION}] of initial light")
        if np.any(np.diff(fs) > 0):
            raise ValueError("lumen fractions must not increase with burn hours")
        if (self.decay_b is None) != (self.decay_alpha is None):
            raise ValueError("an exponential lumen curve needs both decay_b and decay_alpha")
        if self.decay_b is not None and self.decay_alpha is not None:
            if self.basis != "hours":
                raise ValueError("an exponential lumen curve must use the 'hours' basis")
            if not (0 < self.decay_b <= MAX_FRACTION and self.decay_alpha >= 0):
                raise ValueError("exponential lumen curve needs 0 < B <= 1.2 and alpha >= 0")

    @cached_property
    def knots(self) -> tuple[FloatArray, FloatArray]:
        """The points interpolated, starting at x = 0 (full light before the first point)."""
        xs = np.asarray(self.x, dtype=np.float64)
        fs = np.asarray(self.fraction, dtype=np.float64)
        if xs[0] > 0:  # curve starts at full light (or the first value if above 1)
            xs = np.concatenate(([0.0], xs))
            fs = np.concatenate(([max(1.0, float(fs[0]))], fs))
        return xs, fs

    @cached_property
    def interpolator(self) -> PchipInterpolator | None:
        """scipy's PCHIP through the knots (None for a one-point, flat curve)."""
        xs, fs = self.knots
        return PchipInterpolator(xs, fs, extrapolate=False) if xs.size >= 2 else None

    def _at_x(self, u: FloatArray) -> FloatArray:
        """Evaluate on the curve's own x axis (u >= 0)."""
        xs, fs = self.knots
        if self.interpolator is None:
            return np.full(u.shape, fs[0])
        out = np.empty(u.shape, dtype=np.float64)
        inside = u <= xs[-1]
        out[inside] = self.interpolator(u[inside])
        # Beyond the last point: last segment's slope, never rising, floored at 0.
        slope = min((fs[-1] - fs[-2]) / (xs[-1] - xs[-2]), 0.0)
        beyond = ~inside
        out[beyond] = np.maximum(fs[-1] + slope * (u[beyond] - xs[-1]), 0.0)
        return out

    def at(self, hours: ArrayLike, life_h: ArrayLike | None = None) -> FloatArray:
        """Fraction of initial lumens at burn hours (life_h: scaled life, rated-life basis)."""
        t = np.maximum(np.asarray(hours, dtype=np.float64), 0.0)
        if self.valid_to_h is not None:
            t = np.minimum(t, self.valid_to_h)
        if self.decay_b is not None and self.decay_alpha is not None:
            return np.asarray(self.decay_b * np.exp(-self.decay_alpha * t), dtype=np.float64)
        if self.basis == "rated_life_fraction":
            if life_h is None:
                raise ValueError("this lumen curve is in fractions of rated life: give life_h")
            life = np.asarray(life_h, dtype=np.float64)
            if np.any(~(life > 0)):
                raise ValueError("life_h must be positive hours")
            t = t / life
        u = np.asarray(t, dtype=np.float64)
        flat = np.ravel(u)
        return self._at_x(flat).reshape(u.shape)

    def in_hours(self, rated_life_h: float) -> LumenCurve:
        """The same curve on an hours basis for a given rated life in hours."""
        if self.basis == "hours":
            return self
        if not rated_life_h > 0:
            raise ValueError("rated life must be positive hours")
        return LumenCurve(
            tuple(v * rated_life_h for v in self.x),
            self.fraction,
            "hours",
            self.assumed,
            self.source,
        )


def exponential_curve(
    B: float,
    alpha: float,
    *,
    assumed: bool = False,
    source: str = "exponential fit",
    span_h: float | None = None,
) -> LumenCurve:
    """Exact exponential lumen curve B*exp(-alpha*t) (alpha per hour; negative alpha held flat)."""
    if not (math.isfinite(B) and math.isfinite(alpha)):
        raise ValueError("B and alpha must be finite")
    if not 0 < B <= MAX_FRACTION:
        raise ValueError("B must lie in (0, 1.2]")
    a = max(alpha, 0.0)  # rising light is not extrapolated: hold it flat
    if span_h is None:
        span_h = math.log(B / 0.5) / a if a > 0 and B > 0.5 else 100_000.0
    xs = tuple(float(v) for v in np.linspace(0.0, span_h, 11))
    fs = tuple(float(B * math.exp(-a * v)) for v in xs)
    return LumenCurve(xs, fs, "hours", assumed, source, decay_b=float(B), decay_alpha=float(a))


# LED default: exponential with L70 at 50,000 h [practice: LED rated lives 25,000-100,000 h].
LED_DEFAULT_L70_H = 50_000.0

# Points as (fraction of rated life, fraction of initial lumens). [memory] shapes through the
# [practice] anchors noted on each line.
_DEFAULT_POINTS: dict[str, tuple[tuple[float, float], ...]] = {
    # [practice] IEC 60064 criterion commonly quoted: > 93 % at 75 % of rated life.
    "incandescent": ((0.0, 1.0), (0.25, 0.98), (0.5, 0.965), (0.75, 0.945), (1.0, 0.92)),
    # [practice] halogen holds output better than incandescent.
    "halogen": ((0.0, 1.0), (0.25, 0.99), (0.5, 0.98), (0.75, 0.97), (1.0, 0.96)),
    # [practice] mean lumens (40 % of rated life) about 0.90-0.95.
    "linear_fluorescent": ((0.0, 1.0), (0.05, 0.97), (0.4, 0.93), (0.7, 0.90), (1.0, 0.87)),
    # [memory] CFL depreciates more than linear lamps.
    "compact_fluorescent": ((0.0, 1.0), (0.05, 0.95), (0.4, 0.88), (0.7, 0.84), (1.0, 0.80)),
    # [practice] metal halide far steeper: about 0.65-0.75 at 40 % of rated life.
    "metal_halide": ((0.0, 1.0), (0.05, 0.90), (0.4, 0.70), (0.7, 0.62), (1.0, 0.55)),
    # [practice] HPS mean lumens (50 % of rated life) about 0.9.
    "high_pressure_sodium": ((0.0, 1.0), (0.1, 0.96), (0.5, 0.90), (1.0, 0.83)),
    # [practice] mercury vapour steep; [memory] figures.
    "mercury_vapour": ((0.0, 1.0), (0.1, 0.90), (0.5, 0.75), (1.0, 0.62)),
}

# Typical initial efficacy, lumens per rated lamp watt, by technology: the fallback for initial
# lumens when a catalogue entry gives none. [memory] round figures inside the [practice] ranges
# commonly quoted for each family; results that use them are labelled assumed.
DEFAULT_EFFICACY_LM_PER_W: dict[str, float] = {
    "incandescent": 12.0,  # [practice] about 10-17 lm/W
    "halogen": 18.0,  # [practice] about 15-25 lm/W
    "linear_fluorescent": 85.0,  # [practice] T8/T5 about 75-100 lm/W
    "compact_fluorescent": 60.0,  # [practice] about 50-70 lm/W
    "metal_halide": 80.0,  # [practice] about 65-100 lm/W
    "high_pressure_sodium": 105.0,  # [practice] about 80-140 lm/W
    "mercury_vapour": 45.0,  # [practice] about 35-55 lm/W
    "led": 110.0,  # [memory] retrofit lamps about 90-150 lm/W
}


def default_lumen_curve(technology: str, rated_life_h: float | None = None) -> LumenCurve:
    """Assumed lumen maintenance curve for a technology (filament lamps: rated-life basis).

    Discharge lamps get an hours basis using rated_life_h (default: the technology's typical
    rated life); LED gets an exponential with L70 at 50,000 h.
    """
    if technology not in TECHNOLOGY_DEFAULTS:
        raise ValueError(f"unknown technology {technology!r}; expected one of {TECHNOLOGIES}")
    if technology == "led":
        alpha = math.log(1.0 / 0.7) / LED_DEFAULT_L70_H
        return exponential_curve(
            1.0,
            alpha,
            assumed=True,
            source="default LED: exponential, L70 at 50,000 h [practice range]",
        )
    pts = _DEFAULT_POINTS[technology]
    xs = tuple(p[0] for p in pts)
    fs = tuple(p[1] for p in pts)
    label = f"default {technology.replace('_', ' ')} curve [memory, practice anchors]"
    curve = LumenCurve(xs, fs, "rated_life_fraction", True, label)
    if TECHNOLOGY_DEFAULTS[technology].is_filament:
        return curve
    life = (
        rated_life_h
        if rated_life_h is not None
        else (TECHNOLOGY_DEFAULTS[technology].typical_rated_life_h)
    )
    return curve.in_hours(life)


def maintained_fraction(
    light_factor: ArrayLike, depreciation: ArrayLike, survivor: ArrayLike
) -> FloatArray:
    """Maintained light as a fraction of initial: light factor x LLD x survivors (CIE 97)."""
    return np.asarray(
        np.asarray(light_factor, dtype=np.float64)
        * np.asarray(depreciation, dtype=np.float64)
        * np.asarray(survivor, dtype=np.float64),
        dtype=np.float64,
    )
