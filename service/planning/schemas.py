"""Relamp plan requests (what-if overrides) and responses."""

from __future__ import annotations

from datetime import date, datetime
from typing import Literal

from pydantic import BaseModel, ConfigDict, Field

from service.api.times import Timestamp
from service.planning.choice_schemas import LampChoiceBrief
from service.register.schemas import Money, Volts


class PlanOverrides(BaseModel):
    """What-if values for a plan; each replaces the stored or derived one, nothing is saved."""

    # Finite ranges: a what-if must not push the numeric core outside its domain.
    model_config = ConfigDict(extra="forbid", allow_inf_nan=False)

    at: Timestamp | None = Field(default=None, description="Plan as of this moment (default now).")
    lamp_price: Money | None = Field(default=None, description="Per lamp, site currency.")
    labour_rate_per_h: Money | None = None
    group_minutes_per_lamp: float | None = Field(default=None, ge=0, le=600)
    spot_minutes_per_lamp: float | None = Field(default=None, ge=0, le=600)
    equipment_hire_per_visit: Money | None = None
    spot_lamps_per_visit: float | None = Field(
        default=None, ge=1, le=1000, description="Spot lamps sharing one equipment hire (1)."
    )
    disposal_fee_per_lamp: Money | None = None
    energy_price_per_kwh: Money | None = None
    voltage_v: Volts | None = None
    hours_per_start: float | None = Field(default=None, ge=0.01, le=10_000)
    light_floor: float | None = Field(default=None, ge=0.01, le=0.99)
    burnout_ceiling: float | None = Field(default=None, ge=0.001, le=0.99)
    rupture_cap_fraction: float | None = Field(default=None, ge=0.05, le=1)
    weekly_burn_hours: float | None = Field(default=None, ge=0.01, le=168)
    group_age_h: float | None = Field(default=None, ge=0, le=1_000_000)
    objective: Literal["cost", "cost_per_megalumen_hour"] = Field(
        default="cost",
        description="What picks the interval: cost per position-hour (default) or cost per "
        "delivered megalumen-hour (lamp, labour and energy over light delivered).",
    )


class PlanInputs(BaseModel):
    """The figures a lamp type's plan used (money in the site currency, hours, volts)."""

    lamp_price: float
    labour_rate_per_h: float
    access_method: str
    group_minutes_per_lamp: float
    spot_minutes_per_lamp: float
    group_labour_per_lamp: float
    spot_labour_per_lamp: float
    equipment_hire_per_visit: float
    equipment_share_per_group_lamp: float
    equipment_per_spot_lamp: float
    disposal_fee_per_lamp: float
    c_group: float = Field(description="Cost per position of a group relamp.")
    c_spot: float = Field(description="Cost of one spot replacement.")
    energy_price_per_kwh: float
    energy_cost_per_burn_hour: float
    ballast_kind: str = Field(
        description="Ballast whose voltage response the plan uses: the one most of this lamp "
        "type's fixtures in the area run on (filament lamps 'none', LEDs 'led_driver')."
    )
    voltage_v: float
    voltage_basis: str
    hours_per_start: float | None
    voltage_life_factor: float
    switching_life_factor: float
    life_curve: str = Field(
        description="Life curve used: catalogue, mle (field fit) or weibayes (catalogue shape, "
        "field scale); the same choice the forecasts make."
    )
    life_curve_reason: str
    weibull_shape: float = Field(description="Weibull shape of the curve used.")
    weibull_scale_h: float = Field(
        description="Weibull scale in burn hours at this area's voltage and switching."
    )
    mean_life_h: float
    light_floor: float | None
    light_floor_h: float | None
    burnout_ceiling: float | None
    rupture_cap_fraction: float | None
    rupture_cap_h: float | None


class EnergyViewRead(BaseModel):
    """Energy and delivered light: cost per megalumen-hour (Mlm.h) at the plan's interval."""

    objective: str = Field(description="What chose interval_h: cost or cost_per_megalumen_hour.")
    lamp_watts: float = Field(description="Lamp watts at the operating voltage.")
    power_factor: float = Field(description="Lamp watts at the operating voltage / rated.")
    energy_price_per_kwh: float
    energy_cost_per_burn_hour: float = Field(description="Per position.")
    burn_hours_per_year: float
    energy_cost_per_position_per_year: float
    initial_lumens: float = Field(description="Initial light at the operating voltage, lumens.")
    initial_lumens_basis: str = Field(
        description="catalogue, or assumed_efficacy (rated watts x a technology lm/W)."
    )
    assumed_efficacy_lm_per_w: float | None
    light_factor: float = Field(description="Initial light at the operating voltage / rated.")
    interval_h: float | None = Field(description="The plan's interval; null: spot only.")
    mean_light_fraction: float = Field(
        description="Mean light per position over the interval (spot only: stationary), "
        "share of initial."
    )
    cost_per_megalumen_hour: float = Field(description="At interval_h (spot only: spot figure).")
    spot_only_mean_light_fraction: float
    spot_only_cost_per_megalumen_hour: float
    cost_optimum_interval_h: float | None = Field(description="The cost objective's interval.")
    cost_per_megalumen_hour_at_cost_optimum: float
    best_interval_h: float | None = Field(
        description="Interval minimising cost per Mlm.h under the same caps; null: spot only."
    )
    best_binding: str = Field(
        description="megalumen_optimum, light_floor, burnout_ceiling, rupture_cap or spot_only."
    )
    best_cost_per_megalumen_hour: float
    note: str | None = Field(description="Set when the best interval differs from the cost one.")


class CleaningOnlyRead(BaseModel):
    """A cleaning visit without relamping at mid-interval: the light it gives back, its cost."""

    at_h: float = Field(description="Burn hours into the group cycle (half the interval).")
    light_before: float = Field(description="Maintained light per position before cleaning.")
    light_after: float
    light_gain: float = Field(description="Fraction of rated initial light given back.")
    cost_per_visit: float = Field(description="Cleaning labour of all fixtures + one hire.")
    cost_per_position: float


class MaintainedLightRead(BaseModel):
    """Maintained light = lamp lumen depreciation x luminaire dirt x voltage light factor."""

    luminaire_type: str | None
    dirt_environment: str | None
    cleaning_interval_months: float | None
    relamp_includes_cleaning: bool
    source: str = Field(description="The luminaire maintenance factor table followed.")
    voltage_light_factor: float
    light_at_interval: float | None = Field(
        description="Maintained light just before the group relamp (null: spot only)."
    )
    cleaning_labour_per_position: float = Field(
        description="Cleaning the area's fixtures, per position (in c_group when the relamp cleans)."
    )
    cleaning_only: CleaningOnlyRead | None


class FitBoundsRead(BaseModel):
    """How the interval and saving move across the life curve's scale bounds (shape held)."""

    confidence: float
    basis: str
    scale_bounds_h: tuple[float, float]
    interval_h_at_lower: float | None
    interval_h_at_upper: float | None
    binding_at_lower: str
    binding_at_upper: str
    yearly_saving_at_lower: float
    yearly_saving_at_upper: float


class LampTypePlan(BaseModel):
    """The group plan for one lamp type in an area."""

    lamp_type_id: int
    lamp_type_code: str
    positions: int
    interval_h: float | None = Field(description="Group interval, burn hours; null: spot only.")
    interval_weeks: float | None
    binding: str = Field(
        description="cost_optimum, light_floor, burnout_ceiling, rupture_cap or spot_only."
    )
    unconstrained_optimum_h: float | None
    cost_rate: float = Field(description="Per position per burn hour under the plan.")
    spot_only_rate: float
    saving_rate: float
    yearly_saving: float = Field(description="All positions of this type, per year of burning.")
    safety_premium_rate: float
    expected_spot_per_position: float
    group_age_h: float
    due_on: date | None
    overdue: bool
    notes: list[str]
    warnings: list[str]
    inputs: PlanInputs
    objective: str = Field(description="What chose interval_h: cost or cost_per_megalumen_hour.")
    energy_view: EnergyViewRead | None = Field(
        description="Energy and cost per megalumen-hour; null with energy_view_omitted."
    )
    energy_view_omitted: str | None = None
    maintained_light: MaintainedLightRead | None = None
    fit_bounds: FitBoundsRead | None = None


class CatchUpRead(BaseModel):
    """An area's place in its site's catch-up schedule (planning.catch_up)."""

    week: int = Field(description="Weeks from this week (0: this week).")
    week_starts_on: date
    risk_order: int = Field(description="0 for the riskiest due area of the site.")
    risk_weeks: float | None = Field(
        description="Weeks until a safety limit is reached (negative: past it); null: none set."
    )
    labour_h: float
    cost: float = Field(description="Lamps, group labour and disposal, without the hire.")
    hire_charged: float = Field(description="Equipment hire it adds (0 when sharing a visit).")
    shares_visit_with_area_id: int | None
    over_capacity: bool = Field(description="Bigger than a week's capacity on its own.")


class AreaPlanRead(BaseModel):
    """An area's relamp plan: when, why, and at what cost."""

    area_id: int
    area_name: str
    site_id: int
    time_zone: str
    currency: str
    as_of: datetime
    positions: int
    weekly_burn_hours: float
    group_age_h: float | None
    group_age_basis: str = Field(
        description="override | last_group_relamp | installation_dates (a cluster of the "
        "lamps' installation dates: a group relamp before the service) | mean_position_age"
    )
    last_group_relamp_at: datetime | None
    due_on: date | None
    overdue: bool
    interval_h: float | None
    binding: str
    yearly_saving: float
    age_source: str
    lamp_types: list[LampTypePlan]
    catch_up: CatchUpRead | None = Field(
        default=None, description="Its week in the site's catch-up schedule (site plans only)."
    )
    # Set by the area plan route (planning.choice_bodies.plan_briefs): null when no lamp type
    # has an alternative (family, retrofit option) or a withdrawal date.
    lamp_choice: list[LampChoiceBrief] | None = Field(
        default=None, description="Best option per lamp type at the next group relamp."
    )


class SitePlanRead(BaseModel):
    """Every area of a site, soonest due first (spot-only and undated areas last)."""

    site_id: int
    time_zone: str
    as_of: datetime
    weekly_labour_h_capacity: float | None = None
    weekly_budget_capacity: float | None = None
    areas: list[AreaPlanRead]
