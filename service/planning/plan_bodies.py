"""Turn computed plans into response bodies (derived figures: weeks, yearly savings)."""

from __future__ import annotations

import math
from collections.abc import Sequence

from service.planning.energy import EnergyView
from service.planning.light_bodies import bounds_read, maintained_read
from service.planning.plan_views import PlanViews
from service.planning.schemas import (
    AreaPlanRead,
    CatchUpRead,
    EnergyViewRead,
    LampTypePlan,
    PlanInputs,
)
from service.planning.service import WEEKS_PER_YEAR, AreaPlan, TypeGroup
from service.planning.site_schedule import SiteSchedule


def _energy(ev: EnergyView | str, g: TypeGroup, per_year_h: float) -> EnergyViewRead | None:
    if not isinstance(ev, EnergyView):
        return None
    return EnergyViewRead(
        objective=g.group.objective,
        lamp_watts=ev.lamp_watts,
        power_factor=ev.power_factor,
        energy_price_per_kwh=g.costs.energy_price_per_kwh,
        energy_cost_per_burn_hour=ev.energy_per_burn_hour,
        burn_hours_per_year=per_year_h,
        energy_cost_per_position_per_year=ev.energy_per_burn_hour * per_year_h,
        initial_lumens=ev.initial_lumens,
        initial_lumens_basis=ev.initial_lumens_basis,
        assumed_efficacy_lm_per_w=ev.assumed_efficacy_lm_per_w,
        light_factor=ev.light_factor,
        interval_h=ev.interval_h,
        mean_light_fraction=ev.mean_light_fraction,
        cost_per_megalumen_hour=ev.cost_per_mlmh,
        spot_only_mean_light_fraction=ev.spot_only_mean_light_fraction,
        spot_only_cost_per_megalumen_hour=ev.spot_only_cost_per_mlmh,
        cost_optimum_interval_h=ev.cost_optimum_interval_h,
        cost_per_megalumen_hour_at_cost_optimum=ev.cost_per_mlmh_at_cost_optimum,
        best_interval_h=ev.best_interval_h,
        best_binding=ev.best_binding,
        best_cost_per_megalumen_hour=ev.best_cost_per_mlmh,
        note=ev.note,
    )


def _type_plan(
    g: TypeGroup, weekly_h: float, access: str, views: PlanViews | None = None
) -> LampTypePlan:
    p, c, gp = g.group.plan, g.costs, g.group
    ev = views.energy[id(g)] if views else g.energy
    per_year_h = weekly_h * WEEKS_PER_YEAR  # burn hours per year
    return LampTypePlan(
        lamp_type_id=g.lamp_type_id,
        lamp_type_code=g.model.code,
        positions=g.positions,
        interval_h=p.interval_h,
        interval_weeks=(p.interval_h / weekly_h if p.interval_h and weekly_h > 0 else None),
        binding=p.binding,
        unconstrained_optimum_h=p.unconstrained_optimum_h,
        cost_rate=p.cost_rate,
        spot_only_rate=p.spot_only_rate,
        saving_rate=p.saving_rate,
        yearly_saving=p.saving_rate * per_year_h * g.positions,
        safety_premium_rate=p.safety_premium_rate,
        expected_spot_per_position=p.expected_spot_per_position,
        group_age_h=g.group_age_h,
        due_on=g.due_on,
        overdue=g.overdue,
        notes=list(p.notes),
        warnings=list(gp.warnings),
        inputs=PlanInputs(
            lamp_price=c.lamp_price,
            labour_rate_per_h=c.labour_rate_per_h,
            access_method=access,
            group_minutes_per_lamp=c.group_minutes_per_lamp,
            spot_minutes_per_lamp=c.spot_minutes_per_lamp,
            group_labour_per_lamp=c.group_labour,
            spot_labour_per_lamp=c.spot_labour,
            equipment_hire_per_visit=c.equipment_hire_per_visit,
            equipment_share_per_group_lamp=c.group_equipment_share,
            equipment_per_spot_lamp=c.spot_equipment,
            disposal_fee_per_lamp=c.disposal_fee_per_lamp,
            c_group=c.c_group,
            c_spot=c.c_spot,
            energy_price_per_kwh=c.energy_price_per_kwh,
            energy_cost_per_burn_hour=c.energy_per_burn_hour(gp.power_factor),
            ballast_kind=g.model.ballast_behaviour,
            voltage_v=g.voltage_v,
            voltage_basis=g.voltage_basis,
            hours_per_start=g.hours_per_start,
            voltage_life_factor=gp.voltage_life_factor,
            switching_life_factor=gp.switching_factor,
            life_curve=g.curve.method if g.curve else "catalogue",
            life_curve_reason=g.curve.reason if g.curve else "catalogue curve",
            weibull_shape=gp.life.shape,
            weibull_scale_h=gp.life.scale,
            mean_life_h=gp.life.mean(),
            light_floor=g.cond.light_floor,
            light_floor_h=gp.light_floor_h,
            burnout_ceiling=g.cond.burnout_ceiling,
            rupture_cap_fraction=g.cond.rupture_fraction if g.model.rupture_risk else None,
            rupture_cap_h=gp.rupture_cap_h,
        ),
        objective=gp.objective,
        energy_view=_energy(ev, g, per_year_h),
        energy_view_omitted=ev if isinstance(ev, str) else None,
        maintained_light=maintained_read(g, views.maintained[id(g)] if views else None),
        fit_bounds=bounds_read(g, per_year_h, views.bounds[id(g)] if views else None),
    )


def area_plan_reads(plans: Sequence[AreaPlan]) -> list[AreaPlanRead]:
    """area_plan_read of many plans, alike groups' views computed once (plan_views.py)."""
    views = PlanViews.of([g for p in plans for g in p.groups])
    return [area_plan_read(p, views) for p in plans]


def area_plan_read(plan: AreaPlan, views: PlanViews | None = None) -> AreaPlanRead:
    """The response body for one area's plan (views: its groups' views, computed already)."""
    access = plan.area.access_method
    types = [_type_plan(g, plan.weekly_burn_hours, access, views) for g in plan.groups]
    first = plan.first
    ages = [g.group_age_h for g in plan.groups]
    return AreaPlanRead(
        area_id=plan.area.id,
        area_name=plan.area.name,
        site_id=plan.site.id,
        time_zone=plan.site.time_zone,
        currency=plan.site.currency,
        as_of=plan.as_of,
        positions=plan.positions,
        weekly_burn_hours=plan.weekly_burn_hours,
        group_age_h=(first.group_age_h if first else (max(ages) if ages else None)),
        group_age_basis=plan.group_age_basis,
        last_group_relamp_at=plan.last_group_relamp_at,
        due_on=plan.due_on,
        overdue=bool(first and first.overdue),
        interval_h=first.group.plan.interval_h if first else None,
        binding=first.group.plan.binding if first else "spot_only",
        yearly_saving=sum(t.yearly_saving for t in types),
        age_source=plan.age_source,
        lamp_types=types,
    )


def catch_up_read(area_id: int, sched: SiteSchedule) -> CatchUpRead | None:
    """An area's catch-up slot as a body part (None: not due, or on an open group order)."""
    slot, job, start = sched.slots.get(area_id), sched.jobs.get(area_id), sched.week_start(area_id)
    if slot is None or job is None or start is None:
        return None
    return CatchUpRead(
        week=slot.week,
        week_starts_on=start,
        risk_order=slot.order,
        risk_weeks=job.risk_weeks if math.isfinite(job.risk_weeks) else None,
        labour_h=job.labour_h,
        cost=job.cost,
        hire_charged=slot.hire_charged,
        shares_visit_with_area_id=slot.shares_visit_with,
        over_capacity=slot.over_capacity,
    )
