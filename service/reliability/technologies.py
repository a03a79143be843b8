"""Lamp technologies and ballasts: the catalogue-free defaults of every lamp technology.

Per technology: Weibull shape, the voltage-model exponents (life x r^-n or P^-n, light
x r^k or P^k, power x r^m; the formulas are in conditions.py), rated percentile, rated
switching cycle, default ballast, mercury and rupture flags and the trusted voltage band.
Per ballast: the lamp-power gain g in P = 1 + g (r - 1) and the trusted line-voltage band.
Sources: the inverse power law of accelerated life testing [Nelson, *Accelerated
Testing*] for filament exponents; trade practice for ballast gains, bands and switching
(+25 % life at 12 h vs 3 h per start); each value is labelled where it is set.

Voltages are volts, times are burn hours. Labels: [published] a named source, [practice] a
rule of the trade, [memory] recalled and only a default a user can override.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, replace

TECHNOLOGIES: tuple[str, ...] = (
    "incandescent",
    "halogen",
    "linear_fluorescent",
    "compact_fluorescent",
    "metal_halide",
    "high_pressure_sodium",
    "mercury_vapour",
    "led",
)

# Ballast or driver behaviour; "none" is for filament lamps that run straight off the line.
BALLASTS: tuple[str, ...] = ("none", "reactor", "regulating", "electronic", "led_driver")

# d(lamp watts / rated lamp watts) / d(line volts / rated volts).
# NaN for "none": filament lamps use their own power exponent instead.
BALLAST_POWER_GAIN: dict[str, float] = {
    "none": math.nan,
    "reactor": 2.0,  # [practice] +/-5 % line gives about +/-9-12 % lamp watts
    "regulating": 0.5,  # [practice] +/-10 % line gives about +/-5 % lamp watts
    "electronic": 0.0,  # [memory] electronic ballasts hold lamp power nearly flat
    "led_driver": 0.0,  # [practice] flat inside the driver's rated input range
}

# Fractional line-voltage band inside which the model is trusted, by ballast.
BALLAST_VOLTAGE_BAND: dict[str, float] = {
    "none": 0.10,  # [practice] filament power laws hold within about +/-10 %
    "reactor": 0.05,  # [practice] makers limit reactor types to about +/-5 %
    "regulating": 0.10,  # [practice] makers limit regulating types to about +/-10 %
    "electronic": 0.10,  # [memory] typical electronic ballast input tolerance
    "led_driver": 0.10,  # [memory] used only when no driver input range is given
}

# Halogen life gain is not extended below this voltage ratio (halogen cycle stops) [practice;
# the exact ratio 0.90 is this module's choice].
HALOGEN_LIFE_RATIO_FLOOR: float = 0.90

# Default switching slope: life ratio gained per unit of ln(hours per start).
# [practice] about +25 % life at 12 h/start vs 3 h/start: 0.25 / ln(12 / 3).
DEFAULT_SWITCHING_SLOPE: float = 0.25 / math.log(4.0)


@dataclass(frozen=True)
class TechnologyDefaults:
    """Catalogue-free defaults for one lamp technology; every value can be overridden."""

    shape: float  # Weibull beta of catastrophic failures
    life_exponent: float  # n: filament life x r^-n; discharge life x P^-n
    light_exponent: float  # filament light x r^k; discharge light x P^k
    power_exponent: float  # filament power x r^m (unused for ballasted lamps: power = P)
    rated_percentile: float  # percent failed at the rated life (50 = B50, median)
    rated_hours_per_start: float | None  # burn hours per start of the rated cycle
    default_ballast: str
    contains_mercury: bool
    rupture_risk: bool  # non-passive end-of-life failure (metal halide)
    voltage_band: float  # fractional band of trusted line voltage for the default ballast
    life_ratio_floor: float | None = None  # halogen: life gain held below this voltage ratio
    switching_slope: float | None = None  # life ratio per unit ln(h/start) without 2nd point
    typical_rated_life_h: float = 10_000.0  # hours; only for default lumen curves

    @property
    def is_filament(self) -> bool:
        """True for lamps that run straight off the line (no ballast or driver)."""
        return self.default_ballast == "none"


_HIGH_PRESSURE_SODIUM = TechnologyDefaults(
    shape=4.0,  # [memory] HID beta 3-5
    life_exponent=3.0,  # [memory] assumption
    light_exponent=1.0,  # [memory] assumption
    power_exponent=1.0,  # unused (ballasted)
    rated_percentile=50.0,  # [published] IES definition
    rated_hours_per_start=10.0,  # [practice]
    default_ballast="reactor",
    contains_mercury=True,  # [practice] mercury (and sodium)
    rupture_risk=False,
    voltage_band=0.05,  # [practice]
    switching_slope=DEFAULT_SWITCHING_SLOPE,  # [memory] assumption
    typical_rated_life_h=24_000.0,  # [practice] 10,000-30,000 h
)

TECHNOLOGY_DEFAULTS: dict[str, TechnologyDefaults] = {
    "incandescent": TechnologyDefaults(
        shape=3.5,  # [memory] incandescent beta 3-4
        life_exponent=13.0,  # [practice] life x V^-13 to V^-16
        light_exponent=3.4,  # [practice]
        power_exponent=1.6,  # [practice]
        rated_percentile=50.0,  # [published] rated life = 50 % survivors (IES definition)
        rated_hours_per_start=None,  # no switching model for filament lamps
        default_ballast="none",
        contains_mercury=False,
        rupture_risk=False,
        voltage_band=0.10,  # [practice] clamp or warn outside about +/-10 %
        typical_rated_life_h=1_000.0,  # [practice] 750-2,000 h
    ),
    "halogen": TechnologyDefaults(
        shape=3.5,  # [memory] as incandescent, beta 3-4
        life_exponent=14.0,  # [practice] life about V^-14
        light_exponent=3.0,  # [practice] light about V^3
        power_exponent=1.6,  # [practice] as incandescent
        rated_percentile=50.0,  # [published] IES definition
        rated_hours_per_start=None,
        default_ballast="none",
        contains_mercury=False,
        rupture_risk=False,
        voltage_band=0.10,  # [practice]
        life_ratio_floor=HALOGEN_LIFE_RATIO_FLOOR,  # [practice] deep dimming stops the cycle
        typical_rated_life_h=3_000.0,  # [practice] 2,000-4,000 h
    ),
    "linear_fluorescent": TechnologyDefaults(
        shape=5.0,  # [memory] fluorescent beta 4-7
        life_exponent=2.0,  # [memory] assumption: life x P^-2 with lamp power
        light_exponent=1.0,  # [memory] assumption: light roughly proportional to lamp watts
        power_exponent=1.0,  # unused (ballasted)
        rated_percentile=50.0,  # [published] IES definition
        rated_hours_per_start=3.0,  # [practice] standard cycle about 3 h per start
        default_ballast="electronic",
        contains_mercury=True,
        rupture_risk=False,
        voltage_band=0.10,  # [memory] electronic ballast tolerance
        switching_slope=DEFAULT_SWITCHING_SLOPE,  # [practice] +25 % at 12 h vs 3 h
        typical_rated_life_h=24_000.0,  # [practice] 20,000-36,000 h
    ),
    "compact_fluorescent": TechnologyDefaults(
        shape=4.0,  # [memory] fluorescent beta 4-7 (CFL at the low end)
        life_exponent=2.0,  # [memory] assumption, as linear fluorescent
        light_exponent=1.0,  # [memory] assumption
        power_exponent=1.0,  # unused (ballasted)
        rated_percentile=50.0,  # [published] IES definition
        rated_hours_per_start=3.0,  # [practice]
        default_ballast="electronic",
        contains_mercury=True,
        rupture_risk=False,
        voltage_band=0.10,  # [memory]
        switching_slope=DEFAULT_SWITCHING_SLOPE,  # [practice]
        typical_rated_life_h=10_000.0,  # [practice] about 10,000 h
    ),
    "metal_halide": TechnologyDefaults(
        shape=4.0,  # [memory] HID beta 3-5
        life_exponent=3.0,  # [memory] assumption: over-wattage shortens arc-tube life
        light_exponent=1.0,  # [memory] assumption
        power_exponent=1.0,  # unused (ballasted)
        rated_percentile=50.0,  # [published] IES definition
        rated_hours_per_start=10.0,  # [practice] HID tested at 10 h or more per start
        default_ballast="reactor",
        contains_mercury=True,
        rupture_risk=True,  # [practice] can rupture at end of life
        voltage_band=0.05,  # [practice] reactor types limited to about +/-5 %
        switching_slope=DEFAULT_SWITCHING_SLOPE,  # [memory] assumption: as fluorescent
        typical_rated_life_h=15_000.0,  # [practice] 10,000-30,000 h
    ),
    "high_pressure_sodium": _HIGH_PRESSURE_SODIUM,
    # Mercury vapour: the same HID assumptions as high-pressure sodium, a lower shape.
    "mercury_vapour": replace(_HIGH_PRESSURE_SODIUM, shape=3.5),  # [memory] HID beta 3-5
    "led": TechnologyDefaults(
        shape=1.5,  # [memory] LED catastrophic (driver) failures beta 1-2
        life_exponent=1.0,  # [memory] assumption; no effect while the driver holds P = 1
        light_exponent=1.0,  # [memory] assumption; no effect while the driver holds P = 1
        power_exponent=1.0,  # unused (driver)
        # LED "rated life" L70 is a lumen criterion, not a failure percentile. For the
        # catastrophic-failure Weibull we treat the quoted life as a B50 (median) like the
        # other lamps; lumen decay is modelled separately (lumen.py, tm21.py).
        rated_percentile=50.0,
        rated_hours_per_start=None,  # no switching model
        default_ballast="led_driver",
        contains_mercury=False,
        rupture_risk=False,
        voltage_band=0.10,  # [memory] used only when no driver input range is given
        typical_rated_life_h=50_000.0,  # [practice] 25,000-100,000 h
    ),
}
