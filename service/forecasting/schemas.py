"""Response bodies for forecasts, what-if curves and field fits."""

from __future__ import annotations

from datetime import datetime

from pydantic import BaseModel, Field


class CurveInUseRead(BaseModel):
    """The life curve a lamp type's forecasts use: catalogue, blend or field, and the rule."""

    lamp_type_id: int
    method: str = Field(description="catalogue, blend (credibility weight) or field")
    shape: float
    scale_h: float
    reason: str
    weight: float = Field(description="Credibility Z = r/(r+k) of the field data (0-1).")
    scale_bounds_h: tuple[float, float] | None = None
    confidence: float


class SummaryRead(BaseModel):
    """Totals over positions: survival, failure risk, expected burnouts, light."""

    positions: int
    burning: int
    dark: int
    mean_age_h: float
    survival_now: float
    p_fail_horizon: float
    expected_failures_no_replacement: float
    expected_burnouts_spot: float
    lumen_fraction_now: float
    lumen_fraction_end: float
    voltage_warnings: int
    switching_warnings: int
    supply_faults: int = Field(
        0, description="Discharge lamps below their ballast's voltage band (a supply fault)."
    )
    burnouts_low: int = Field(
        0, description="Lower end of the 90 % range of expected_failures_no_replacement."
    )
    burnouts_high: int = Field(
        0, description="Upper end of that range (method: the forecast's `method` text)."
    )


class AreaForecastRead(BaseModel):
    """An area's forecast and the dates it crosses its light floor and burnout ceiling."""

    area_id: int
    name: str
    burn_h_per_week: float
    light_floor: float | None
    burnout_ceiling: float | None
    light_floor_date: datetime | None
    burnout_ceiling_date: datetime | None
    summary: SummaryRead


class PositionForecastRead(BaseModel):
    """One lamp position's forecast."""

    position_id: int
    fixture_id: int
    area_id: int
    lamp_type_id: int
    age_h: float
    burned_out: bool
    voltage_v: float
    voltage_source: str
    hours_per_start: float | None
    life_factor: float
    scale_h: float
    survival: float
    p_fail_horizon: float
    expected_burnouts_spot: float
    lumen_fraction: float
    lumen_fraction_end: float
    warn_voltage: bool


class ForecastRead(BaseModel):
    """A forecast for a scope, with the method notes in `method`."""

    scope: str
    scope_id: int
    at: datetime
    time_zone: str
    horizon_weeks: float
    summary: SummaryRead
    areas: list[AreaForecastRead]
    curves: list[CurveInUseRead]
    positions: list[PositionForecastRead] | None
    method: str


class CurveRead(BaseModel):
    """S(t), lumen fraction and renewal M(t) on a grid of burn hours."""

    lamp_type_id: int
    voltage_v: float
    hours_per_start: float | None
    life_factor: float
    light_factor: float
    power_factor: float
    shape: float
    scale_h: float
    warn_voltage: bool
    warn_switching: bool
    curve: CurveInUseRead
    t_h: list[float]
    survival: list[float]
    lumen_fraction: list[float]
    renewal_m: list[float]


class WeibullFitRead(BaseModel):
    """A fitted Weibull with bounds (hours: rated-voltage-equivalent)."""

    method: str
    shape: float
    scale_h: float
    shape_bounds: tuple[float, float]
    scale_bounds: tuple[float, float | None]
    confidence: float
    log_likelihood: float


class KaplanMeierPoint(BaseModel):
    """One step of the Kaplan-Meier estimate."""

    t_h: float
    survival: float
    lower: float
    upper: float
    at_risk: int
    events: int


class FieldFitRead(BaseModel):
    """Field fit of a lamp type: records, MLE, WeiBayes, Kaplan-Meier and the curve chosen."""

    lamp_type_id: int
    site_id: int | None
    n_failures: int
    n_censored: int
    n_removed: int
    n_in_service: int
    catalogue_shape: float
    catalogue_scale_h: float
    mle: WeibullFitRead | None
    mle_error: str | None
    weibayes: WeibullFitRead | None
    kaplan_meier: list[KaplanMeierPoint]
    choice: CurveInUseRead
    forecasts_use: CurveInUseRead
