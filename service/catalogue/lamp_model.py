"""The resolved model numbers of a lamp type: catalogue values, fits and technology defaults.

resolve_lamp_model() turns one LampType row into the numbers the forecasts use, and says
for each where it came from ("catalogue", "fit" or "default"). lamp_type_table() stacks
resolved models into the numeric core's LampTypeTable for fleet evaluation.

Life law: shape = the catalogue weibull_shape, else the slope of the maker's mortality points
on the Weibull probability plot (service.reliability.mortality), else the technology default.
Scale, always: eta = L_p / (-ln(1 - p))^(1/beta) from the catalogue rated life L_p at its
percentile p (the maker's headline figure), never the mortality curve's own scale; that one is
reported beside it (LampModel.mortality_fit) with its disagreement from the rated life.

LED lamp types have two lives. rated_life_h is the lumen life L70 (hours to 70 % of initial
light), not a failure percentile. Catastrophic failures (mostly the driver) have their own
Weibull: the catalogue's failure_b10_h (hours by which 10 % have failed) with the shape,
else the technology default B10 = LED_DEFAULT_B10_OF_L70 x the L70 hours, an ASSUMPTION of
ours (no source: makers' "L70B10" figures are lumen criteria too), labelled in sources.
Light: when the type carries LM-80-style test data (lm80_points [[hours, mean lumen
fraction]], lm80_units, lm80_duration_h) the lumen curve is its IES TM-21 projection
(service.reliability.tm21: points before 1,000 h ignored, so early rise is accepted; the
6x / 5.5x reporting cap), held at the cap beyond it, and lumen_life_label reads e.g.
"L70(10k) > 60,000 h" when the projection passes the cap.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass, field, fields
from typing import Any, Protocol

import numpy as np

from service.catalogue.mortality import check_mortality_points, fit_mortality_points
from service.reliability.fleet import LampTypeTable
from service.reliability.lumen import LumenCurve, default_lumen_curve
from service.reliability.mortality import MortalityFit
from service.reliability.technologies import (
    BALLAST_POWER_GAIN,
    BALLAST_VOLTAGE_BAND,
    DEFAULT_SWITCHING_SLOPE,
    TECHNOLOGY_DEFAULTS,
    TechnologyDefaults,
)
from service.reliability.tm21 import TM21Result, tm21_projection
from service.reliability.weibull import scale_from_rated_life

CATALOGUE = "catalogue"
FIT = "fit"
DEFAULT = "default"
# LED catastrophic failures without a catalogue figure: B10 = this x the L70 hours.
# ASSUMPTION (no source): 10 % of units fail (driver and electronics) by the lumen life.
LED_DEFAULT_B10_OF_L70 = 1.0
LED_FAILURE_PERCENTILE = 10.0  # failure_b10_h is a B10 life


class LampTypeLike(Protocol):
    """The LampType columns the resolver reads (an ORM row or any object with them)."""

    id: int
    code: str
    technology: str
    rated_watts: float
    rated_volts: float
    rated_life_h: float
    rated_percentile: float
    rated_hours_per_start: float | None
    second_hours_per_start: float | None
    second_cycle_life_h: float | None
    weibull_shape: float | None
    mortality_points: list[list[float]] | None
    lumen_points: list[list[float]] | None
    lumen_basis: str
    initial_lumens: float | None
    life_exponent: float | None
    light_exponent: float | None
    power_exponent: float | None
    ballast_behaviour: str | None
    driver_min_volts: float | None
    driver_max_volts: float | None
    unit_price: float
    contains_mercury: bool
    rupture_risk: bool


def _led_columns(lt: LampTypeLike) -> tuple[float | None, list[list[float]] | None, int | None]:
    """failure_b10_h, lm80_points, lm80_units of a lamp type (absent on older objects)."""
    return (
        getattr(lt, "failure_b10_h", None),
        getattr(lt, "lm80_points", None),
        getattr(lt, "lm80_units", None),
    )


def _led_failure_life(lt: LampTypeLike, rated_life: float, src: dict[str, str]) -> float | None:
    """LED: B10 hours of catastrophic failures (catalogue, else the labelled default)."""
    if lt.technology != "led":
        return None
    b10, _, _ = _led_columns(lt)
    if b10 is not None:
        src["failure_life_h"] = CATALOGUE
        return float(b10)
    src["failure_life_h"] = (
        f"{DEFAULT} (assumption: B10 of failures = {LED_DEFAULT_B10_OF_L70:g} x L70)"
    )
    return LED_DEFAULT_B10_OF_L70 * rated_life


def _tm21(lt: LampTypeLike) -> TM21Result | None:
    """The TM-21 projection of an LED type's LM-80 points, when it has them."""
    _, lm80, units = _led_columns(lt)
    if not lm80:
        return None
    pts = sorted((float(p[0]), float(p[1])) for p in lm80)
    return tm21_projection([p[0] for p in pts], [p[1] for p in pts], sample_size=int(units or 20))


@dataclass(frozen=True)
class LampModel:
    """A lamp type's resolved model numbers (hours, volts, watts, lumens) and their sources."""

    lamp_type_id: int | None
    code: str
    technology: str
    shape: float  # Weibull beta
    scale_h: float  # Weibull eta at rated volts and rated cycle, burn hours
    rated_life_h: float  # burn hours at rated_percentile failed
    rated_percentile: float  # percent failed at rated life (50 = B50)
    rated_volts: float
    life_exponent: float
    light_exponent: float
    power_exponent: float
    ballast_behaviour: str
    ballast_gain: float  # NaN for filament lamps
    is_filament: bool
    rated_hours_per_start: float | None  # burn hours per start; None = no switching model
    second_hours_per_start: float | None
    second_life_ratio: float | None  # second_cycle_life_h / rated_life_h
    driver_min_volts: float | None
    driver_max_volts: float | None
    lumen_curve: LumenCurve
    initial_lumens: float | None
    rated_watts: float
    unit_price: float
    contains_mercury: bool
    rupture_risk: bool
    voltage_band: float  # fraction of rated volts inside which the voltage model is trusted
    life_ratio_floor: float | None  # halogen: life gain held below this voltage ratio
    switching_slope: float  # life ratio per unit ln(h/start) without a second point
    sources: dict[str, str] = field(default_factory=dict)
    mortality_fit: MortalityFit | None = None  # the maker's curve fitted, when given
    mortality_fit_used: bool = False  # True when its shape is the model's shape
    tm21: TM21Result | None = None  # LED: the TM-21 projection of the type's LM-80 data
    lumen_life_label: str | None = None  # LED: e.g. "L70(10k) > 60,000 h"
    failure_life_h: float | None = None  # LED: B10 of catastrophic failures, hours

    @property
    def driver_range(self) -> tuple[float, float] | None:
        """LED driver input range in volts, when both ends are given."""
        if self.driver_min_volts is None or self.driver_max_volts is None:
            return None
        return (self.driver_min_volts, self.driver_max_volts)


def _pick(value: float | None, default: float, name: str, sources: dict[str, str]) -> float:
    if value is None:
        sources[name] = DEFAULT
        return float(default)
    sources[name] = CATALOGUE
    return float(value)


@dataclass(frozen=True, kw_only=True)
class _Life:
    """The survival numbers of a lamp type: rated life, its percentile, shape and scale."""

    rated_percentile: float
    rated_life_h: float
    shape: float
    scale_h: float
    failure_life_h: float | None
    mortality_fit: MortalityFit | None


def _life(lt: LampTypeLike, d: TechnologyDefaults, src: dict[str, str]) -> _Life:
    """Rated life and percentile, the Weibull shape (catalogue, fit, default) and scale."""
    pct = float(lt.rated_percentile)
    src["rated_percentile"] = CATALOGUE
    rated_life = float(lt.rated_life_h)
    src["rated_life_h"] = CATALOGUE
    # The maker's mortality curve, fitted whenever given (shown even when not used). Points
    # stored before a check existed and no longer fit are set aside, never a failure here.
    mfit: MortalityFit | None = None
    if lt.mortality_points:
        problem = check_mortality_points(lt.mortality_points)
        if problem is None:
            mfit = fit_mortality_points(lt.mortality_points, rated_life, pct)
        else:
            src["mortality_points"] = f"not used: {problem}"
    # Shape: catalogue beta, else the mortality curve's slope, else the technology default.
    if lt.weibull_shape is not None:
        shape = float(lt.weibull_shape)
        src["shape"] = CATALOGUE
    elif mfit is not None:
        shape = mfit.shape
        src["shape"] = FIT
    else:
        shape = d.shape
        src["shape"] = DEFAULT
    # Scale: from the rated life with that shape (the curve's own scale is only reported).
    scale_h = float(scale_from_rated_life(rated_life, shape, pct))
    src["scale_h"] = src["shape"]  # rated life is catalogue; the shape decides the scale
    failure_life = _led_failure_life(lt, rated_life, src)
    if failure_life is not None:  # LED: rated life is L70 (light); failures have their own
        scale_h = float(scale_from_rated_life(failure_life, shape, LED_FAILURE_PERCENTILE))
        src["scale_h"] = src["failure_life_h"]
    return _Life(
        rated_percentile=pct,
        rated_life_h=rated_life,
        shape=shape,
        scale_h=scale_h,
        failure_life_h=failure_life,
        mortality_fit=mfit,
    )


def _ballast(lt: LampTypeLike, d: TechnologyDefaults, src: dict[str, str]) -> str:
    """The ballast behaviour: the catalogue's, else the technology's default."""
    if lt.ballast_behaviour is None:
        ballast = d.default_ballast
        src["ballast_behaviour"] = DEFAULT
    else:
        ballast = lt.ballast_behaviour
        src["ballast_behaviour"] = CATALOGUE
    if ballast not in BALLAST_POWER_GAIN:
        raise ValueError(f"unknown ballast behaviour {ballast!r}")
    src["ballast_gain"] = DEFAULT
    return ballast


@dataclass(frozen=True, kw_only=True)
class _Switching:
    """Rated burn hours per start and the optional second quoted cycle."""

    rated_hours_per_start: float | None
    second_hours_per_start: float | None
    second_life_ratio: float | None


def _switching(
    lt: LampTypeLike, d: TechnologyDefaults, rated_life: float, src: dict[str, str]
) -> _Switching:
    """Hours per start of the rated life, and the second cycle's life as a ratio of it."""
    if lt.rated_hours_per_start is not None:
        rhps: float | None = float(lt.rated_hours_per_start)
        src["rated_hours_per_start"] = CATALOGUE
    else:
        rhps = d.rated_hours_per_start
        src["rated_hours_per_start"] = DEFAULT
    second_hps: float | None = None
    second_ratio: float | None = None
    if lt.second_hours_per_start is not None and lt.second_cycle_life_h is not None:
        second_hps = float(lt.second_hours_per_start)
        second_ratio = float(lt.second_cycle_life_h) / rated_life
        src["second_life_ratio"] = CATALOGUE
    else:
        src["second_life_ratio"] = DEFAULT  # default switching slope applies
    return _Switching(
        rated_hours_per_start=rhps,
        second_hours_per_start=second_hps,
        second_life_ratio=second_ratio,
    )


def _lumen(
    lt: LampTypeLike, d: TechnologyDefaults, rated_life: float, src: dict[str, str]
) -> tuple[LumenCurve, TM21Result | None, str | None]:
    """The light-loss curve (TM-21, catalogue points, default), its TM-21 fit and LED label."""
    tech = lt.technology
    tm21 = _tm21(lt) if tech == "led" else None
    label: str | None = None
    if tm21 is not None:
        curve = tm21.lumen_curve()
        label = tm21.life_label(70)
        src["lumen_curve"] = "fit (IES TM-21 of the LM-80 data)"
    elif lt.lumen_points:
        pts = sorted((float(p[0]), float(p[1])) for p in lt.lumen_points)
        curve = LumenCurve(
            tuple(p[0] for p in pts),
            tuple(p[1] for p in pts),
            lt.lumen_basis or "hours",
            False,
            "catalogue lumen points",
        )
        src["lumen_curve"] = CATALOGUE
    else:
        curve = default_lumen_curve(tech, None if d.is_filament else rated_life)
        src["lumen_curve"] = DEFAULT
    if tech == "led" and label is None:
        label = f"L70 = {rated_life:,.0f} h (catalogue)"
    return curve, tm21, label


def _by_name(part: _Life | _Switching) -> dict[str, Any]:
    """A resolved part's fields by name (each is a LampModel field of the same name)."""
    return {f.name: getattr(part, f.name) for f in fields(part)}


def resolve_lamp_model(lt: LampTypeLike) -> LampModel:
    """Resolve a lamp type's model numbers: catalogue value, else a fit, else the default."""
    tech = lt.technology
    if tech not in TECHNOLOGY_DEFAULTS:
        raise ValueError(f"unknown technology {tech!r}")
    d = TECHNOLOGY_DEFAULTS[tech]
    src: dict[str, str] = {}
    life = _life(lt, d, src)
    life_exp = _pick(lt.life_exponent, d.life_exponent, "life_exponent", src)
    light_exp = _pick(lt.light_exponent, d.light_exponent, "light_exponent", src)
    power_exp = _pick(lt.power_exponent, d.power_exponent, "power_exponent", src)
    ballast = _ballast(lt, d, src)
    sw = _switching(lt, d, life.rated_life_h, src)
    dmin = None if lt.driver_min_volts is None else float(lt.driver_min_volts)
    dmax = None if lt.driver_max_volts is None else float(lt.driver_max_volts)
    src["driver_range"] = CATALOGUE if dmin is not None and dmax is not None else DEFAULT
    curve, tm21, label = _lumen(lt, d, life.rated_life_h, src)
    return LampModel(
        lamp_type_id=getattr(lt, "id", None),
        code=lt.code,
        technology=tech,
        **_by_name(life),  # shape, scale, rated life and percentile, failure life, fit
        **_by_name(sw),  # rated and second hours per start, second life ratio
        rated_volts=float(lt.rated_volts),
        life_exponent=life_exp,
        light_exponent=light_exp,
        power_exponent=power_exp,
        ballast_behaviour=ballast,
        ballast_gain=BALLAST_POWER_GAIN[ballast],
        is_filament=d.is_filament,
        driver_min_volts=dmin,
        driver_max_volts=dmax,
        lumen_curve=curve,
        initial_lumens=None if lt.initial_lumens is None else float(lt.initial_lumens),
        rated_watts=float(lt.rated_watts),
        unit_price=float(lt.unit_price or 0.0),
        contains_mercury=bool(lt.contains_mercury),
        rupture_risk=bool(lt.rupture_risk),
        voltage_band=BALLAST_VOLTAGE_BAND[ballast],
        life_ratio_floor=d.life_ratio_floor,
        switching_slope=(
            DEFAULT_SWITCHING_SLOPE if d.switching_slope is None else d.switching_slope
        ),
        sources=src,
        mortality_fit_used=life.mortality_fit is not None and src["shape"] == FIT,
        tm21=tm21,
        lumen_life_label=label,
    )


def _nan(v: float | None) -> float:
    return math.nan if v is None else float(v)


def lamp_type_table(models: Sequence[LampModel]) -> LampTypeTable:
    """Stack resolved lamp models into the numeric core's LampTypeTable (index = position)."""

    def col(values: list[float]) -> np.ndarray:
        return np.asarray(values, dtype=np.float64)

    return LampTypeTable(
        shape=col([m.shape for m in models]),
        scale_h=col([m.scale_h for m in models]),
        rated_voltage=col([m.rated_volts for m in models]),
        life_exponent=col([m.life_exponent for m in models]),
        light_exponent=col([m.light_exponent for m in models]),
        power_exponent=col([m.power_exponent for m in models]),
        ballast_gain=col([m.ballast_gain for m in models]),
        is_filament=np.asarray([m.is_filament for m in models], dtype=bool),
        rated_hours_per_start=col([_nan(m.rated_hours_per_start) for m in models]),
        second_hours_per_start=col([_nan(m.second_hours_per_start) for m in models]),
        second_life_ratio=col([_nan(m.second_life_ratio) for m in models]),
        lumen_curves=tuple(m.lumen_curve for m in models),
        voltage_band=col([m.voltage_band for m in models]),
        life_ratio_floor=col([_nan(m.life_ratio_floor) for m in models]),
        switching_slope=col([m.switching_slope for m in models]),
        driver_min_v=col([_nan(m.driver_min_volts) for m in models]),
        driver_max_v=col([_nan(m.driver_max_volts) for m in models]),
    )
