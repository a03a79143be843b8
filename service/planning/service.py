"""Relamp plans per area and per site, computed in bulk from numpy arrays of positions.

Each (area, lamp type) group gets its own group interval (engine.plan_group); an area is
due when its first lamp-type group is. Ballast: a group is relamped together whatever its
fixtures' ballasts, so its voltage response uses the area's dominant ballast for that lamp
type: the kind most of the group's positions run on (catalogue.resolved decides per position:
the fixture's kind for discharge lamps, "none" for filament, "led_driver" for LED; a tie goes
to the alphabetically first kind). The plan's inputs name it (PlanInputs.ballast_kind). Group age: burn hours since the area's last
completed group relamp (scheduled weekly burn hours x weeks since, when the area has a
schedule); else, where the area's installation dates cluster (a group relamp before the
service: planning.group_age states the rule), the median age of the lamps put in then;
else the mean age of the group's positions. The calendar date divides the
remaining hours by the area's weekly burn hours, counted from today in the site's zone.
What-if objective "cost_per_megalumen_hour" re-chooses each group's interval by cost per
delivered megalumen-hour (energy.megalumen_plan); each group's energy view (energy.py) is
computed only when asked for (TypeGroup.energy), so the weekly run never pays for it.
Nothing here writes to the database.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass
from datetime import date, datetime, timedelta
from functools import cached_property
from zoneinfo import ZoneInfo

import numpy as np
from sqlalchemy import select
from sqlalchemy.orm import Session

from service.catalogue.lamp_model import LampModel
from service.catalogue.resolved import CurveInUse
from service.db.base import utcnow
from service.db.crud import get_or_404
from service.forecasting.fit import load_fitted_types
from service.planning.catch_up import Slot
from service.planning.energy import MEGALUMEN, EnergyView, energy_view, megalumen_plan
from service.planning.group_age import group_ages
from service.planning.group_plan import (
    DEFAULT_RUPTURE_FRACTION,
    Conditions,
    CostInputs,
    GroupPlan,
    PlanCache,
)
from service.planning.positions import PositionArrays, load_positions
from service.planning.schemas import PlanOverrides
from service.register.models import Area, Site

WEEKS_PER_YEAR = 365.25 / 7.0
VOLTAGE_STEP_V = 0.1  # representative voltages are rounded to this (meters read no finer)


@dataclass(frozen=True)
class TypeGroup:
    """One lamp type's positions in an area and their plan."""

    lamp_type_id: int
    model: LampModel
    positions: int
    voltage_v: float
    voltage_basis: str
    hours_per_start: float | None
    costs: CostInputs
    cond: Conditions
    group: GroupPlan
    group_age_h: float
    due_on: date | None
    overdue: bool
    curve: CurveInUse | None = None  # which life curve (catalogue or field fit) and why

    @cached_property
    def energy(self) -> EnergyView | str:
        """The energy and megalumen view, or why it could not be computed (on first use)."""
        try:
            return energy_view(self.model, self.costs, self.cond, self.group)
        except ValueError as exc:  # e.g. a grid that cannot reach the interval
            return f"energy view not available: {exc}"


@dataclass(frozen=True)
class AreaPlan:
    """An area's plan (see AreaPlanRead for the fields a client sees)."""

    area: Area
    site: Site
    as_of: datetime
    positions: int
    weekly_burn_hours: float
    group_age_basis: str
    last_group_relamp_at: datetime | None
    age_source: str
    groups: list[TypeGroup]
    catch_up: Slot | None = None  # its week in the site's catch-up schedule, where one ran

    @property
    def first(self) -> TypeGroup | None:
        """The lamp-type group due soonest (None when all are spot only)."""
        dated = [g for g in self.groups if g.due_on is not None]
        return min(dated, key=lambda g: g.due_on or date.max) if dated else None

    @property
    def due_on(self) -> date | None:
        """The area's due date: its first group's."""
        g = self.first
        return g.due_on if g else None


def local_today(site: Site, at: datetime) -> date:
    """The calendar date at a moment in the site's time zone."""
    return at.astimezone(ZoneInfo(site.time_zone)).date()


# Due dates further ahead than this many days are not given (they would overflow a date).
MAX_DUE_DAYS = 100 * 366


def due_date(
    today: date, interval_h: float | None, group_age_h: float, weekly_h: float
) -> tuple[date | None, bool]:
    """(due date, overdue) from the remaining burn hours and the weekly burn rate."""
    if interval_h is None:
        return None, False
    remaining = interval_h - group_age_h
    if remaining <= 0:
        return today, True
    if weekly_h <= 0:
        return None, False
    days = remaining / weekly_h * 7.0
    if not days < MAX_DUE_DAYS:  # a relamp a century away is no date to plan by
        return None, False
    return today + timedelta(days=math.floor(days)), False


# Completed group relamps by area, from the work orders above this layer (planning must not
# import workorders: work orders call planning). The caller hands the query in.
LastRelamps = Callable[[Session, Sequence[int]], Mapping[int, datetime]]


def _models(
    session: Session, pos: PositionArrays
) -> tuple[dict[tuple[int, str], LampModel], dict[int, CurveInUse], np.ndarray]:
    """Models by (lamp type, ballast), curves by lamp type, and each position's ballast."""
    # The same life curves the forecasts use: the field fit where it replaces the catalogue.
    types = load_fitted_types(
        session, pos.lamp_type_id, field_fit=True, ballast_kinds=pos.ballast_kind
    )
    keys = list(zip(types.ids.tolist(), types.ballasts.tolist(), strict=True))
    models = dict(zip(keys, types.models, strict=True))
    curves = {k[0]: c for k, c in zip(keys, types.curves, strict=True)}
    return models, curves, types.ballast_of(pos.lamp_type_id, pos.ballast_kind)


def plan_areas(  # noqa: PLR0915  (exempt list: tests/unit/test_function_length.py)
    session: Session,
    site: Site,
    areas: Sequence[Area],
    pos: PositionArrays,
    at: datetime,
    over: PlanOverrides | None = None,
    cache: PlanCache | None = None,
    *,
    last_relamps: Mapping[int, datetime],
) -> list[AreaPlan]:
    """Plans for the given areas of one site; last_relamps: last completed group relamp by area."""
    over = over or PlanOverrides()
    cache = cache or PlanCache()
    today = local_today(site, at)
    last = last_relamps
    models: dict[tuple[int, str], LampModel] = {}
    curves: dict[int, CurveInUse] = {}
    ballast = np.zeros(0, dtype="<U12")
    if pos.size:
        models, curves, ballast = _models(session, pos)
    plans: dict[int, AreaPlan] = {}
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
    # Group ages from clustered installation dates (NaN where an area's dates spread).
    cluster_age = group_ages(pos.area_id, inv, pos.installed_at_s, pos.age_h, ng)
    # Dominant ballast per group: positions counted per (group, ballast kind), the most wins.
    kinds, kind_of = np.unique(ballast, return_inverse=True)
    per_kind = np.zeros((ng, kinds.size), dtype=np.int64)
    np.add.at(per_kind, (inv, np.asarray(kind_of).ravel()), 1)
    dominant = kinds[per_kind.argmax(axis=1)] if kinds.size else kinds
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
        basis = _age_basis(over, last_at, weekly, [float(cluster_age[g]) for g in gidx])
        groups: list[TypeGroup] = []
        for g in gidx:
            lt_id = int(uniq[g, 1])
            model = models[(lt_id, str(dominant[g]))]
            if over.voltage_v is not None:
                volts, vbasis = over.voltage_v, "override"
            elif hours[g] > 0:
                volts, vbasis = volt_h[g] / hours[g], "burn_hour_weighted_mean"
            else:
                volts, vbasis = volt_sum[g] / count[g], "mean_of_positions"
            volts = round(round(volts / VOLTAGE_STEP_V) * VOLTAGE_STEP_V, 6)
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
                labour_rate_per_h=_pick(over.labour_rate_per_h, site.labour_rate_per_h),
                group_minutes_per_lamp=_pick(
                    over.group_minutes_per_lamp, area.group_minutes_per_lamp
                ),
                spot_minutes_per_lamp=_pick(over.spot_minutes_per_lamp, area.spot_minutes_per_lamp),
                equipment_hire_per_visit=_pick(
                    over.equipment_hire_per_visit, area.equipment_hire_per_visit
                ),
                area_positions=max(n_area, 1),
                spot_lamps_per_visit=_pick(over.spot_lamps_per_visit, 1.0),
                disposal_fee_per_lamp=fee if mercury else 0.0,
                energy_price_per_kwh=_pick(over.energy_price_per_kwh, site.energy_price_per_kwh),
                lamp_watts=model.rated_watts,
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
                rupture_fraction=_pick(over.rupture_cap_fraction, DEFAULT_RUPTURE_FRACTION),
            )
            gp = cache.get(model, costs, cond)
            if over.objective == MEGALUMEN:
                gp = megalumen_plan(model, costs, cond, gp)
            mean_age = float(hours[g] / count[g])
            age = _group_age(basis, over, last_at, weekly, at, float(cluster_age[g]), mean_age)
            due, overdue = due_date(today, gp.plan.interval_h, age, weekly)
            groups.append(
                TypeGroup(
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
        plans[area.id] = AreaPlan(
            area, site, at, n_area, weekly, basis, last_at, pos.source, groups
        )
    return [plans[a.id] for a in areas]


def _age_basis(
    over: PlanOverrides, last_at: datetime | None, weekly: float, cluster_ages: list[float]
) -> str:
    """Where an area's group age comes from (see the module docstring)."""
    if over.group_age_h is not None:
        return "override"
    if last_at is not None and weekly > 0:
        return "last_group_relamp"
    if any(math.isfinite(a) for a in cluster_ages):
        return "installation_dates"
    return "mean_position_age"


def _group_age(
    basis: str,
    over: PlanOverrides,
    last_at: datetime | None,
    weekly: float,
    at: datetime,
    cluster_age: float,
    mean_age: float,
) -> float:
    """A lamp-type group's age in burn hours by the area's basis."""
    if basis == "override":
        return float(over.group_age_h or 0.0)
    if basis == "last_group_relamp" and last_at is not None:
        return weekly * max((at - last_at).total_seconds(), 0.0) / (168.0 * 3600.0)
    if basis == "installation_dates" and math.isfinite(cluster_age):
        return cluster_age
    return mean_age


def _pick(value: float | None, default: float) -> float:
    return float(default) if value is None else float(value)


def area_plan(
    session: Session,
    area_id: int,
    over: PlanOverrides | None = None,
    *,
    last_relamps: LastRelamps,
) -> AreaPlan:
    """One area's plan (404 if the area is missing); overrides are what-if only."""
    area = get_or_404(session, Area, area_id, "area")
    site = session.get(Site, area.site_id)
    assert site is not None  # the foreign key guarantees it
    at = (over.at if over and over.at else None) or utcnow()
    pos = load_positions(session, area_id=area.id, at=at)
    last = last_relamps(session, [area.id])
    return plan_areas(session, site, [area], pos, at, over, last_relamps=last)[0]


def site_plans(
    session: Session,
    site: Site,
    at: datetime | None = None,
    cache: PlanCache | None = None,
    *,
    last_relamps: LastRelamps,
) -> list[AreaPlan]:
    """Every area of a site, soonest due first; spot-only and undated areas last."""
    when = at or utcnow()
    active = (Area.site_id == site.id, Area.retired_at.is_(None))
    areas = session.scalars(select(Area).where(*active).order_by(Area.id)).all()
    pos = load_positions(session, site_id=site.id, at=when)
    last = last_relamps(session, [a.id for a in areas])
    plans = plan_areas(session, site, list(areas), pos, when, None, cache, last_relamps=last)
    return sorted(plans, key=lambda p: (p.due_on or date.max, p.area.id))
