"""Request and response bodies for lamp types, with the resolved model block."""

from __future__ import annotations

import itertools
import json
import math
from datetime import date, datetime
from typing import Annotated, Any, Literal

from fastapi import Query
from pydantic import AfterValidator, BaseModel, ConfigDict, Field

from service.api.times import Day
from service.catalogue.lamp_model import LampModel
from service.catalogue.mortality import (
    MortalityFitRead,
    check_mortality_points,
    fit_mortality_points,
)
from service.reliability.lumen import MAX_FRACTION
from service.reliability.technologies import BALLASTS, TECHNOLOGIES, TECHNOLOGY_DEFAULTS
from service.reliability.tm21 import tm21_projection

# List routes of retirable records (lamp types, sites, areas, fixtures) take this filter.
IncludeRetiredQ = Annotated[
    bool, Query(description="Also list retired records (hidden by default).")
]

# Weibull shapes a lamp type may have, given or fitted from mortality points.
MIN_SHAPE, MAX_SHAPE = 0.1, 50.0


def _technology(v: str) -> str:
    if v not in TECHNOLOGIES:
        raise ValueError(f"unknown technology '{v}'; expected one of: {', '.join(TECHNOLOGIES)}")
    return v


def _ballast(v: str) -> str:
    if v not in BALLASTS:
        raise ValueError(f"unknown ballast behaviour '{v}'; expected one of: {', '.join(BALLASTS)}")
    return v


def _mortality(points: list[list[float]]) -> list[list[float]]:
    problem = check_mortality_points(points)
    if problem is not None:
        raise ValueError(problem)
    # The points set the shape; a nearly flat curve fits a shape near zero whose scale
    # overflows. Hold the fitted shape to the range a given weibull_shape must keep.
    try:
        shape = fit_mortality_points(points).shape
    except (ArithmeticError, ValueError):
        shape = math.nan
    if not MIN_SHAPE <= shape <= MAX_SHAPE:
        raise ValueError(
            f"these points fit a Weibull shape outside [{MIN_SHAPE:g}, {MAX_SHAPE:g}]; "
            "check the percentages"
        )
    return [[float(a), float(b)] for a, b in sorted(points)]


# Lumen points: x within 10 million (hours or rated-life fractions) and at least a
# millionth apart, so the interpolant's slopes stay finite (5e-324 apart overflowed them).
MAX_LUMEN_X = 10_000_000.0
MIN_LUMEN_GAP = 1e-6


def _lumen(points: list[list[float]]) -> list[list[float]]:
    if not points:
        raise ValueError("give at least one lumen point, or leave lumen_points out")
    for p in points:
        if len(p) != 2:
            raise ValueError("each lumen point is [hours or rated-life fraction, fraction]")
        if not (math.isfinite(p[0]) and 0 <= p[0] <= MAX_LUMEN_X):
            raise ValueError(
                f"lumen point x (hours or rated-life fraction) must lie in [0, {MAX_LUMEN_X:g}]"
            )
        if not (math.isfinite(p[1]) and 0 < p[1] <= MAX_FRACTION):
            raise ValueError(f"lumen fraction of initial light must lie in (0, {MAX_FRACTION}]")
    pts = sorted([float(a), float(b)] for a, b in points)
    for (x0, f0), (x1, f1) in itertools.pairwise(pts):
        if x1 - x0 < MIN_LUMEN_GAP:
            raise ValueError(f"two lumen points lie closer than {MIN_LUMEN_GAP:g} in x")
        if f1 > f0:
            raise ValueError("lumen fractions must not increase with burn hours")
    return pts


def _extra(value: dict[str, Any]) -> dict[str, Any]:
    # Stored as a JSON column: PostgreSQL's json refuses NaN and Infinity, and the size
    # is capped so that a lamp type stays a catalogue row, not a file store.
    try:
        text = json.dumps(value, allow_nan=False)
    except ValueError:
        raise ValueError("extra must hold finite numbers only") from None
    if len(text) > MAX_EXTRA_CHARS:
        raise ValueError(f"extra is larger than {MAX_EXTRA_CHARS} characters as JSON")
    return value


MAX_EXTRA_CHARS = 10_000
MAX_POINTS = 200  # mortality or lumen points per lamp type
Technology = Annotated[str, AfterValidator(_technology)]
Extra = Annotated[dict[str, Any], AfterValidator(_extra)]
Ballast = Annotated[str, AfterValidator(_ballast)]
MortalityPoints = Annotated[
    list[Annotated[list[float], Field(min_length=2, max_length=2)]],
    Field(max_length=MAX_POINTS),
    AfterValidator(_mortality),
    Field(description="[[% of rated life > 0, % surviving in (0, 100)], ...]; 2 or more."),
]


def _lm80(points: list[list[float]]) -> list[list[float]]:
    """LM-80-style points: hours >= 0 strictly increasing, mean lumen fraction in (0, 1.5].

    Early rise is allowed (TM-21 ignores data before 1,000 h); the projection's own rules
    (test of 6,000 h or more, 10 units or more) are checked on the whole lamp type.
    """
    if len(points) < 2:
        raise ValueError("give at least two LM-80 points [hours, mean lumen fraction]")
    pts = sorted((float(a), float(b)) for a, b in points)
    for h, f in pts:
        if not (math.isfinite(h) and 0 <= h <= MAX_LUMEN_X):
            raise ValueError("LM-80 hours must lie in [0, 10,000,000]")
        if not (math.isfinite(f) and 0 < f <= 1.5):
            raise ValueError("LM-80 lumen fractions must lie in (0, 1.5] of initial light")
    if any(b[0] - a[0] < MIN_LUMEN_GAP for a, b in itertools.pairwise(pts)):
        raise ValueError("LM-80 hours must be distinct")
    return [[h, f] for h, f in pts]


Lm80Points = Annotated[
    list[Annotated[list[float], Field(min_length=2, max_length=2)]],
    Field(max_length=MAX_POINTS),
    AfterValidator(_lm80),
]

LumenPoints = Annotated[
    list[Annotated[list[float], Field(min_length=2, max_length=2)]],
    Field(max_length=MAX_POINTS),
    AfterValidator(_lumen),
    Field(description="[[hours or rated-life fraction >= 0, fraction in (0, 1.2]], ...]."),
]
# The lower and upper bounds below lie far outside any real lamp; they are there so that
# the survival, voltage and cost formulas stay finite (a 5e-324 shape or volt makes the
# Weibull scale or the voltage ratio infinite, and the forecasts then fail).
Lumens = Annotated[float, Field(gt=0, le=10_000_000, allow_inf_nan=False, description="Lumens.")]
Volts = Annotated[float, Field(ge=1, le=1000, allow_inf_nan=False, description="Volts.")]
Hours = Annotated[float, Field(ge=0.01, le=10_000_000, allow_inf_nan=False, description="Hours.")]
Percentile = Annotated[
    float, Field(ge=0.1, le=99.9, description="Percent failed at rated life, in [0.1, 99.9].")
]
Exponent = Annotated[float, Field(gt=0, le=30, allow_inf_nan=False)]
Watts = Annotated[float, Field(ge=0.01, le=100_000, allow_inf_nan=False, description="Watts.")]
Shape = Annotated[
    float, Field(ge=MIN_SHAPE, le=MAX_SHAPE, allow_inf_nan=False, description="Weibull shape.")
]
Price = Annotated[float, Field(ge=0, le=1_000_000_000, allow_inf_nan=False)]
LumenBasis = Literal["hours", "rated_life_fraction"]


class LampTypeCreate(BaseModel):
    """A new lamp type. Optional model fields fall back to the technology's defaults.

    rated_percentile is the percent failed at rated_life_h (50 = median, B50). For LED the
    quoted L70 life is a lumen criterion, not a failure percentile: it stays B50 for the
    failure curve unless given, and light loss comes from lumen_points.
    """

    model_config = ConfigDict(extra="forbid", allow_inf_nan=False)

    code: str = Field(min_length=1, max_length=40)
    description: str | None = Field(default=None, max_length=300)
    technology: Technology
    shape_designation: str | None = Field(default=None, max_length=20)
    base_designation: str | None = Field(default=None, max_length=20)
    rated_watts: Watts
    rated_volts: Volts
    rated_life_h: Hours
    rated_percentile: Percentile | None = None
    rated_hours_per_start: Hours | None = None
    second_hours_per_start: Hours | None = None
    second_cycle_life_h: Hours | None = None
    weibull_shape: Shape | None = None
    mortality_points: MortalityPoints | None = None
    lumen_points: LumenPoints | None = None
    lumen_basis: LumenBasis = "hours"
    initial_lumens: Lumens | None = None
    life_exponent: Exponent | None = None
    light_exponent: Exponent | None = None
    power_exponent: Exponent | None = None
    ballast_behaviour: Ballast | None = None
    driver_min_volts: Volts | None = None
    driver_max_volts: Volts | None = None
    failure_b10_h: Hours | None = Field(
        default=None, description="LED: hours by which 10 % have failed (catastrophic)."
    )
    lm80_points: Lm80Points | None = Field(
        default=None, description="LED: LM-80-style [[hours, mean lumen fraction], ...]."
    )
    lm80_units: int | None = Field(default=None, ge=1, le=100_000)
    lm80_duration_h: Hours | None = None
    unit_price: Price = 0.0
    contains_mercury: bool | None = Field(default=None, description="Default: by technology.")
    rupture_risk: bool | None = Field(default=None, description="Default: by technology.")
    family: str | None = Field(
        default=None, min_length=1, max_length=60,
        description="Types of one family differ only in rated volts or make; lamp choice "
        "offers the one rated nearest the measured voltage.",
    )  # fmt: skip
    withdrawn_after: Day | None = Field(
        default=None, description="Withdrawn from sale from this date: plans ask for a replacement."
    )
    withdrawn_market: str | None = Field(
        default=None, min_length=1, max_length=40, description="Where withdrawn; unset: everywhere."
    )
    extra: Extra | None = None

    def stored_values(self) -> dict[str, Any]:
        """Column values with the technology defaults that are stored (percentile, flags)."""
        d = TECHNOLOGY_DEFAULTS[self.technology]
        values = self.model_dump()
        if values["rated_percentile"] is None:
            values["rated_percentile"] = d.rated_percentile
        if values["contains_mercury"] is None:
            values["contains_mercury"] = d.contains_mercury
        if values["rupture_risk"] is None:
            values["rupture_risk"] = d.rupture_risk
        return values


def cross_check(values: dict[str, Any]) -> list[tuple[str, str]]:
    """Rules across fields of a whole lamp type: (field, message) for each broken one."""
    out: list[tuple[str, str]] = []
    tech = values.get("technology")
    ballast = values.get("ballast_behaviour")
    if tech in TECHNOLOGY_DEFAULTS and ballast is not None:
        filament = TECHNOLOGY_DEFAULTS[tech].is_filament
        if filament != (ballast == "none"):
            need = "'none'" if filament else "a ballast or driver, not 'none'"
            out.append(("ballast_behaviour", f"a {tech} lamp needs {need}"))
    if (values.get("second_hours_per_start") is None) != (
        values.get("second_cycle_life_h") is None
    ):
        out.append(
            ("second_cycle_life_h", "give second_hours_per_start and second_cycle_life_h together")
        )
    lm80 = values.get("lm80_points")
    if lm80:
        if tech != "led":
            out.append(("lm80_points", "LM-80 test data applies to LED lamp types only"))
        else:
            try:
                tm21_projection(
                    [p[0] for p in lm80],
                    [p[1] for p in lm80],
                    sample_size=int(values.get("lm80_units") or 20),
                )
            except ValueError as exc:
                out.append(("lm80_points", f"not projectable by IES TM-21: {exc}"))
        dur = values.get("lm80_duration_h")
        if dur is not None and dur < max(p[0] for p in lm80):
            out.append(("lm80_duration_h", "the test duration is shorter than its last point"))
    if values.get("failure_b10_h") is not None and tech != "led":
        out.append(("failure_b10_h", "a separate failure life applies to LED lamp types only"))
    lo, hi = values.get("driver_min_volts"), values.get("driver_max_volts")
    if (lo is None) != (hi is None):
        out.append(("driver_max_volts", "give driver_min_volts and driver_max_volts together"))
    elif lo is not None and hi is not None and not lo < hi:
        out.append(("driver_min_volts", "driver_min_volts must be below driver_max_volts"))
    return out


# Every column a client may set, in the order exports write them.
LAMP_TYPE_FIELDS: tuple[str, ...] = tuple(LampTypeCreate.model_fields)


class LampTypeUpdate(BaseModel):
    """A partial update; the merged lamp type is checked as a whole (same rules as create)."""

    model_config = ConfigDict(extra="forbid", allow_inf_nan=False)

    code: str | None = Field(default=None, min_length=1, max_length=40)
    description: str | None = Field(default=None, max_length=300)
    technology: Technology | None = None
    shape_designation: str | None = Field(default=None, max_length=20)
    base_designation: str | None = Field(default=None, max_length=20)
    rated_watts: Watts | None = None
    rated_volts: Volts | None = None
    rated_life_h: Hours | None = None
    rated_percentile: Percentile | None = None
    rated_hours_per_start: Hours | None = None
    second_hours_per_start: Hours | None = None
    second_cycle_life_h: Hours | None = None
    weibull_shape: Shape | None = None
    mortality_points: MortalityPoints | None = None
    lumen_points: LumenPoints | None = None
    lumen_basis: LumenBasis | None = None
    initial_lumens: Lumens | None = None
    life_exponent: Exponent | None = None
    light_exponent: Exponent | None = None
    power_exponent: Exponent | None = None
    ballast_behaviour: Ballast | None = None
    driver_min_volts: Volts | None = None
    driver_max_volts: Volts | None = None
    failure_b10_h: Hours | None = None
    lm80_points: Lm80Points | None = None
    lm80_units: int | None = Field(default=None, ge=1, le=100_000)
    lm80_duration_h: Hours | None = None
    unit_price: Price | None = None
    contains_mercury: bool | None = None
    rupture_risk: bool | None = None
    family: str | None = Field(default=None, min_length=1, max_length=60)
    withdrawn_after: Day | None = None
    withdrawn_market: str | None = Field(default=None, min_length=1, max_length=40)
    extra: Extra | None = None


class LumenCurveRead(BaseModel):
    """The lumen maintenance curve the forecasts use."""

    basis: str  # "hours" or "rated_life_fraction"
    points: list[list[float]]  # [[x, fraction of initial light], ...]
    assumed: bool  # True when a technology default stands in for catalogue data
    source: str
    decay_b: float | None = None  # exact exponential B*exp(-alpha*t), when used
    decay_alpha_per_h: float | None = None


class LampModelRead(BaseModel):
    """What the forecasts use for this lamp type, and where each number came from."""

    shape: float
    scale_h: float
    rated_life_h: float
    rated_percentile: float
    rated_volts: float
    life_exponent: float
    light_exponent: float
    power_exponent: float
    ballast_behaviour: str
    ballast_gain: float | None  # None for filament lamps (they follow their own power laws)
    is_filament: bool
    rated_hours_per_start: float | None
    second_hours_per_start: float | None
    second_life_ratio: float | None
    driver_min_volts: float | None
    driver_max_volts: float | None
    voltage_band: float
    lumen_curve: LumenCurveRead
    sources: dict[str, str]
    mortality_fit: MortalityFitRead | None = None  # the maker's curve as fitted, when given
    lumen_life_label: str | None = None  # LED: e.g. "L70(10k) > 60,000 h" (TM-21 cap)
    lumen_valid_to_h: float | None = None  # LED: the TM-21 reporting cap, hours
    failure_life_h: float | None = None  # LED: B10 of catastrophic failures, hours

    @classmethod
    def of(cls, m: LampModel) -> LampModelRead:
        """The read form of a resolved LampModel."""
        c = m.lumen_curve
        return cls(
            shape=m.shape,
            scale_h=m.scale_h,
            rated_life_h=m.rated_life_h,
            rated_percentile=m.rated_percentile,
            rated_volts=m.rated_volts,
            life_exponent=m.life_exponent,
            light_exponent=m.light_exponent,
            power_exponent=m.power_exponent,
            ballast_behaviour=m.ballast_behaviour,
            ballast_gain=None if math.isnan(m.ballast_gain) else m.ballast_gain,
            is_filament=m.is_filament,
            rated_hours_per_start=m.rated_hours_per_start,
            second_hours_per_start=m.second_hours_per_start,
            second_life_ratio=m.second_life_ratio,
            driver_min_volts=m.driver_min_volts,
            driver_max_volts=m.driver_max_volts,
            voltage_band=m.voltage_band,
            lumen_curve=LumenCurveRead(
                basis=c.basis,
                points=[[x, f] for x, f in zip(c.x, c.fraction, strict=True)],
                assumed=c.assumed,
                source=c.source,
                decay_b=c.decay_b,
                decay_alpha_per_h=c.decay_alpha,
            ),
            sources=dict(m.sources),
            lumen_life_label=m.lumen_life_label,
            lumen_valid_to_h=c.valid_to_h,
            failure_life_h=m.failure_life_h,
            mortality_fit=(
                MortalityFitRead.of(m.mortality_fit, m.mortality_fit_used)
                if m.mortality_fit
                else None
            ),
        )


class LampTypeRead(BaseModel):
    """A stored lamp type with its resolved model."""

    model_config = ConfigDict(from_attributes=True)

    id: int
    version: int = Field(description="Record version; the ETag, and what If-Match compares.")
    code: str
    description: str | None
    technology: str
    shape_designation: str | None
    base_designation: str | None
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
    failure_b10_h: float | None = None
    lm80_points: list[list[float]] | None = None
    lm80_units: int | None = None
    lm80_duration_h: float | None = None
    unit_price: float
    contains_mercury: bool
    rupture_risk: bool
    family: str | None = None
    withdrawn_after: date | None = None
    withdrawn_market: str | None = None
    extra: dict[str, Any] | None
    created_at: datetime
    updated_at: datetime
    retired_at: datetime | None = Field(
        default=None, description="When retired (kept for past orders and field fits)."
    )
    model: LampModelRead | None = Field(
        default=None, description="The numbers the forecasts use and their sources."
    )
