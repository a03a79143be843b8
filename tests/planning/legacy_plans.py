"""The area planner as it was before the bulk interval search, kept as a test oracle.

Each group's interval comes from PlanCache.get (one scalar plan_group call per distinct
input); tests compare service.planning.service.plan_areas (one vectorised search per shared
renewal curve) with it field by field.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from datetime import datetime

import numpy as np
from sqlalchemy.orm import Session

from service.catalogue.lamp_model import LampModel
from service.catalogue.resolved import CurveInUse
from service.planning import service as svc
from service.planning.energy import MEGALUMEN, megalumen_plan
from service.planning.group_age import group_ages
from service.planning.group_plan import DEFAULT_RUPTURE_FRACTION, Conditions, CostInputs, PlanCache
from service.planning.maintained import fixtures_by_area, regime_of
from service.planning.positions import PositionArrays
from service.planning.schemas import PlanOverrides
from service.register.models import Area, Site


def legacy_plan_areas(  # noqa: PLR0915  (the pre-split code, kept as the test oracle)
    session: Session,
    site: Site,
    areas: Sequence[Area],
    pos: PositionArrays,
    at: datetime,
    over: PlanOverrides | None = None,
    cache: PlanCache | None = None,
    *,
    last_relamps: Mapping[int, datetime],
) -> list[svc.AreaPlan]:
    """Plans for the given areas of one site; last_relamps: last completed group relamp by area."""
    over = over or PlanOverrides()
    cache = cache or PlanCache()
    today = svc.local_today(site, at)
    last = last_relamps
    models: dict[tuple[int, str], LampModel] = {}
    curves: dict[int, CurveInUse] = {}
    ballast = np.zeros(0, dtype="<U12")
    if pos.size:
        models, curves, ballast = svc._models(session, pos)
    plans: dict[int, svc.AreaPlan] = {}
    # Group positions by (area, lamp type) with numpy: sums by group, no per-row loop.
    keys = np.stack([pos.area_id, pos.lamp_type_id], axis=1) if pos.size else np.empty((0, 2))
    uniq, inv = (
        np.unique(keys, axis=0, return_inverse=True) if pos.size else (keys, np.empty(0, int))
    )
    inv = np.asarray(inv).ravel()
    ng = len(uniq)
    count = np.bincount(inv, minlength=ng).astype(np.float64)
    hours = np.bincount(inv, weights=pos.age_h, minlength=ng)
    starts = np.bincount(inv, weights=pos.starts, minlength=ng)
    volt_h = np.bincount(inv, weights=pos.age_h * pos.voltage_v, minlength=ng)
    volt_sum = np.bincount(inv, weights=pos.voltage_v, minlength=ng)
    area_count = np.bincount(inv, minlength=ng)
    rate_sum = np.bincount(inv, weights=np.nan_to_num(pos.burn_h_per_week), minlength=ng)
    # The group-age rule from installation dates (planning.group_age) came after the bulk
    # planner; the oracle applies it the same way so the comparison stays on the search.
    cluster_age = group_ages(pos.area_id, inv, pos.installed_at_s, pos.age_h, ng)
    # Dominant ballast per group: positions counted per (group, ballast kind), the most wins.
    kinds, kind_of = np.unique(ballast, return_inverse=True)
    per_kind = np.zeros((ng, kinds.size), dtype=np.int64)
    np.add.at(per_kind, (inv, np.asarray(kind_of).ravel()), 1)
    dominant = kinds[per_kind.argmax(axis=1)] if kinds.size else kinds
    n_fixtures = fixtures_by_area(pos.area_id, pos.fixture_id)  # luminaire cleaning labour
    by_area: dict[int, list[int]] = {}
    for g in range(ng):
        by_area.setdefault(int(uniq[g, 0]), []).append(g)
    for area in areas:
        gidx = by_area.get(area.id, [])
        n_area = int(sum(int(area_count[g]) for g in gidx))
        weekly = area.burn_hours_per_week
        if weekly <= 0 and n_area > 0:  # no schedule: the measured rate, if any
            weekly = float(sum(rate_sum[g] for g in gidx) / n_area)
        if over.weekly_burn_hours is not None:
            weekly = over.weekly_burn_hours
        last_at = last.get(area.id)
        if over.group_age_h is not None:
            basis = "override"
        elif last_at is not None and weekly > 0:
            basis = "last_group_relamp"
        elif any(np.isfinite(cluster_age[g]) for g in gidx):
            basis = "installation_dates"
        else:
            basis = "mean_position_age"
        groups: list[svc.TypeGroup] = []
        for g in gidx:
            lt_id = int(uniq[g, 1])
            model = models[(lt_id, str(dominant[g]))]
            if over.voltage_v is not None:
                volts, vbasis = over.voltage_v, "override"
            elif hours[g] > 0:
                volts, vbasis = volt_h[g] / hours[g], "burn_hour_weighted_mean"
            else:
                volts, vbasis = volt_sum[g] / count[g], "mean_of_positions"
            volts = round(round(volts / svc.VOLTAGE_STEP_V) * svc.VOLTAGE_STEP_V, 6)
            if over.hours_per_start is not None:
                hps: float | None = over.hours_per_start
            elif area.hours_per_start is not None:
                hps = area.hours_per_start
            elif starts[g] > 0 and hours[g] > 0:
                hps = round(hours[g] / starts[g], 3)
            else:
                hps = None
            mercury = model.contains_mercury
            fee = (
                over.disposal_fee_per_lamp
                if over.disposal_fee_per_lamp is not None
                else site.disposal_fee_per_mercury_lamp
            )
            costs = CostInputs(
                lamp_price=over.lamp_price if over.lamp_price is not None else model.unit_price,
                labour_rate_per_h=svc._pick(over.labour_rate_per_h, site.labour_rate_per_h),
                group_minutes_per_lamp=svc._pick(
                    over.group_minutes_per_lamp, area.group_minutes_per_lamp
                ),
                spot_minutes_per_lamp=svc._pick(
                    over.spot_minutes_per_lamp, area.spot_minutes_per_lamp
                ),
                equipment_hire_per_visit=svc._pick(
                    over.equipment_hire_per_visit, area.equipment_hire_per_visit
                ),
                area_positions=max(n_area, 1),
                spot_lamps_per_visit=svc._pick(over.spot_lamps_per_visit, 1.0),
                disposal_fee_per_lamp=fee if mercury else 0.0,
                energy_price_per_kwh=svc._pick(
                    over.energy_price_per_kwh, site.energy_price_per_kwh
                ),
                lamp_watts=model.rated_watts,
                relamp_cleans=area.relamp_includes_cleaning,
                cleaning_labour_per_position=svc._cleaning(
                    area, site, over, n_fixtures.get(area.id, 0), n_area
                ),
            )
            cond = Conditions(
                voltage_v=volts,
                hours_per_start=hps,
                light_floor=over.light_floor if over.light_floor is not None else area.light_floor,
                burnout_ceiling=(
                    over.burnout_ceiling
                    if over.burnout_ceiling is not None
                    else area.burnout_ceiling
                ),
                rupture_fraction=svc._pick(over.rupture_cap_fraction, DEFAULT_RUPTURE_FRACTION),
                dirt=regime_of(area),
                weekly_burn_hours=weekly,
            )
            gp = cache.get(model, costs, cond)
            if over.objective == MEGALUMEN:
                gp = megalumen_plan(model, costs, cond, gp)
            if basis == "override":
                age = float(over.group_age_h or 0.0)
            elif basis == "last_group_relamp" and last_at is not None:
                age = weekly * max((at - last_at).total_seconds(), 0.0) / (168.0 * 3600.0)
            elif basis == "installation_dates" and np.isfinite(cluster_age[g]):
                age = float(cluster_age[g])
            else:
                age = float(hours[g] / count[g])
            due, overdue = svc.due_date(today, gp.plan.interval_h, age, weekly)
            groups.append(
                svc.TypeGroup(
                    lt_id,
                    model,
                    int(count[g]),
                    volts,
                    vbasis,
                    hps,
                    costs,
                    cond,
                    gp,
                    age,
                    due,
                    overdue,
                    curves.get(lt_id),
                )
            )
        plans[area.id] = svc.AreaPlan(
            area, site, at, n_area, weekly, basis, last_at, pos.source, groups
        )
    return [plans[a.id] for a in areas]
