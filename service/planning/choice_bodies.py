"""Response bodies of the lamp choice (money in the site currency, hours, kWh, kg CO2)."""

from __future__ import annotations

from datetime import date, datetime

from pydantic import BaseModel, Field
from sqlalchemy.orm import Session

from service.planning.choice import TypeChoice, area_choice, economics, has_alternatives
from service.planning.choice_schemas import LampChoiceBrief
from service.planning.lamp_choice import DEFAULT_HORIZON_YEARS, OptionResult
from service.planning.service import AreaPlan


class OptionRead(BaseModel):
    """One option's cycle, life-cycle cost and figures against the same lamp type."""

    kind: str = Field(description="same_type, rated_for_voltage or retrofit.")
    label: str
    lamp_type_id: int | None
    retrofit_option_id: int | None
    units: int = Field(description="Lamp positions, or fixtures for a retrofit.")
    interval_h: float | None = Field(description="Group interval, burn hours; null: spot only.")
    binding: str
    watts_per_unit: float = Field(description="At the operating voltage.")
    life_cycle_cost: float = Field(description="NPV of all costs over the horizon.")
    npv_by_category: dict[str, float]
    costs_by_year: list[float] = Field(description="Years 0..horizon, undiscounted.")
    saving_npv: float = Field(description="Same lamp type's life-cycle cost minus this one's.")
    simple_payback_years: float | None
    discounted_payback_years: float | None
    irr: float | None = Field(description="Of the saving flows against the same lamp type.")
    energy_kwh_per_year: float
    energy_saved_kwh: float = Field(description="Over the horizon, against the same lamp type.")
    co2_saved_kg: float | None = Field(description="Null when the site has no emission factor.")
    mean_light_fraction: float | None = Field(description="Mean delivered light / design light.")
    below_light_floor: bool
    withdrawn: str | None
    best: bool
    notes: list[str]


class TypeChoiceRead(BaseModel):
    """The options for one lamp type of the area at its next group relamp."""

    lamp_type_id: int
    lamp_type_code: str
    positions: int
    voltage_v: float
    due_on: date | None
    replacement_required: bool = Field(description="The current type is withdrawn from sale.")
    best_label: str | None
    best_kind: str | None
    notes: list[str]
    options: list[OptionRead]


class LampChoiceRead(BaseModel):
    """An area's lamp choice: every option's life-cycle cost at the site's money terms."""

    area_id: int
    area_name: str
    currency: str
    as_of: datetime
    horizon_years: int
    discount_rate: float
    energy_escalation_rate: float
    emission_factor_kg_per_kwh: float | None
    burn_hours_per_year: float
    lamp_types: list[TypeChoiceRead]


def _option(r: OptionResult, best: OptionResult | None) -> OptionRead:
    o = r.option
    return OptionRead(
        kind=o.kind,
        label=o.label,
        lamp_type_id=o.lamp_type_id,
        retrofit_option_id=o.retrofit_option_id,
        units=o.units,
        interval_h=r.plan.plan.interval_h,
        binding=r.plan.plan.binding,
        watts_per_unit=r.watts_per_unit,
        life_cycle_cost=r.life_cycle_cost,
        npv_by_category=r.npv_by_category,
        costs_by_year=[float(v) for v in r.total_by_year],
        saving_npv=r.saving_npv,
        simple_payback_years=r.simple_payback_years,
        discounted_payback_years=r.discounted_payback_years,
        irr=r.irr,
        energy_kwh_per_year=float(r.kwh_by_year[1]) if r.kwh_by_year.size > 1 else 0.0,
        energy_saved_kwh=r.energy_saved_kwh,
        co2_saved_kg=r.co2_saved_kg,
        mean_light_fraction=r.mean_light_fraction,
        below_light_floor=r.below_light_floor,
        withdrawn=o.withdrawn,
        best=r is best,
        notes=list(r.notes),
    )


def _type(tc: TypeChoice) -> TypeChoiceRead:
    c, g = tc.comparison, tc.group
    return TypeChoiceRead(
        lamp_type_id=g.lamp_type_id,
        lamp_type_code=g.model.code,
        positions=g.positions,
        voltage_v=g.voltage_v,
        due_on=g.due_on,
        replacement_required=c.replacement_required,
        best_label=c.best.option.label if c.best else None,
        best_kind=c.best.option.kind if c.best else None,
        notes=list(c.notes),
        options=[_option(r, c.best) for r in c.results],
    )


def lamp_choice_read(
    session: Session,
    plan: AreaPlan,
    horizon_years: int = DEFAULT_HORIZON_YEARS,
    cleaning_minutes_per_fixture: float = 0.0,
) -> LampChoiceRead:
    """The full comparison for an area."""
    eco = economics(plan, horizon_years)
    types = area_choice(
        session,
        plan,
        horizon_years=horizon_years,
        cleaning_minutes_per_fixture=cleaning_minutes_per_fixture,
    )
    return LampChoiceRead(
        area_id=plan.area.id,
        area_name=plan.area.name,
        currency=plan.site.currency,
        as_of=plan.as_of,
        horizon_years=horizon_years,
        discount_rate=eco.discount_rate,
        energy_escalation_rate=eco.escalation_rate,
        emission_factor_kg_per_kwh=eco.emission_factor_kg_per_kwh,
        burn_hours_per_year=eco.burn_hours_per_year,
        lamp_types=[_type(tc) for tc in types],
    )


def brief(tc: TypeChoice) -> LampChoiceBrief:
    """The best option of one lamp type's comparison."""
    c = tc.comparison
    return LampChoiceBrief(
        lamp_type_id=tc.group.lamp_type_id,
        best_label=c.best.option.label if c.best else None,
        best_kind=c.best.option.kind if c.best else None,
        saving_npv=c.best.saving_npv if c.best else None,
        simple_payback_years=c.best.simple_payback_years if c.best else None,
        replacement_required=c.replacement_required,
        notes=list(c.notes),
    )


def plan_briefs(session: Session, plan: AreaPlan) -> list[LampChoiceBrief] | None:
    """The best option per lamp type for the area plan; None when there is nothing to choose."""
    if not has_alternatives(session, plan):
        return None
    try:
        return [brief(tc) for tc in area_choice(session, plan)]
    except ValueError as exc:  # a model the comparison cannot evaluate: the plan still answers
        return [
            LampChoiceBrief(
                lamp_type_id=g.lamp_type_id,
                best_label=None,
                best_kind=None,
                saving_npv=None,
                simple_payback_years=None,
                replacement_required=False,
                notes=[f"lamp choice not available: {exc}"],
            )
            for g in plan.groups
        ]
