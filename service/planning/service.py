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
from numpy.typing import NDArray
from sqlalchemy import select
from sqlalchemy.orm import Session

from service.catalogue.lamp_model import LampModel
from service.catalogue.resolved import CurveInUse, TypeTable
from service.db.base import utcnow
from service.db.crud import get_or_404
from service.forecasting.fit import load_fitted_types
from service.planning.catch_up import Slot
from service.planning.energy import MEGALUMEN, EnergyView, Lights, energy_view, megalumen_plan
from service.planning.group_age import group_ages
from service.planning.group_plan import (
    DEFAULT_RUPTURE_FRACTION,
    Conditions,
    CostInputs,
    GroupPlan,
    PlanCache,
)
from service.planning.maintained import (
    cleaning_labour_per_position,
    fixtures_by_area,
    regime_of,
)
from service.planning.positions import PositionArrays, load_positions
from service.planning.schemas import PlanOverrides
from service.register.models import Area, Site
from service.reliability.dirt import DirtRegime

FloatArray = NDArray[np.float64]
IntArray = NDArray[np.int64]
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
        return self.energy_with()

    def energy_with(self, lights: Lights | None = None) -> EnergyView | str:
        """The energy view, sharing delivered light with other views through lights."""
        try:
            return energy_view(self.model, self.costs, self.cond, self.group, lights)
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
    return models_of(types, pos)


def models_of(
    types: TypeTable, pos: PositionArrays
) -> tuple[dict[tuple[int, str], LampModel], dict[int, CurveInUse], np.ndarray]:
    """_models from a type table already loaded for these positions (or more)."""
    keys = list(zip(types.ids.tolist(), types.ballasts.tolist(), strict=True))
    models = dict(zip(keys, types.models, strict=True))
    curves = {k[0]: c for k, c in zip(keys, types.curves, strict=True)}
    return models, curves, types.ballast_of(pos.lamp_type_id, pos.ballast_kind)


@dataclass(frozen=True, kw_only=True)
class GroupSums:
    """Per (area, lamp type) group of positions: sums over its positions (numpy, no loop)."""

    area_id: IntArray
    lamp_type_id: IntArray
    count: FloatArray  # positions
    hours: FloatArray  # sum of ages, burn hours
    starts: FloatArray
    volt_h: FloatArray  # sum of age x volts
    volt_sum: FloatArray
    rate_sum: FloatArray  # sum of weekly burn hours (NaN as 0)
    dominant: NDArray[np.str_]  # the ballast kind most of the group's positions run on
    # Age from the area's clustered installation dates (planning.group_age; NaN: none).
    cluster_age: FloatArray

    def by_area(self) -> dict[int, list[int]]:
        """Group indices of each area, in lamp type order."""
        out: dict[int, list[int]] = {}
        for g, a in enumerate(self.area_id.tolist()):
            out.setdefault(int(a), []).append(g)
        return out


def group_sums(pos: PositionArrays, ballast: NDArray[np.str_]) -> GroupSums:
    """Sums by (area, lamp type) with numpy; ballast: each position's resolved ballast kind."""
    # One integer key per (area, lamp type), sorting as the pairs do: a 1-D unique is far
    # quicker than np.unique(axis=0) on the pairs.
    width = int(pos.lamp_type_id.max()) + 1 if pos.size else 1
    key = pos.area_id.astype(np.int64) * width + pos.lamp_type_id
    ukey, inv = np.unique(key, return_inverse=True)
    uniq = np.stack([ukey // width, ukey % width], axis=1)
    inv = np.asarray(inv).ravel()
    ng = len(uniq)

    def total(w: FloatArray | None = None) -> FloatArray:
        out: FloatArray = np.bincount(inv, weights=w, minlength=ng).astype(np.float64)
        return out

    # Dominant ballast per group: positions counted per (group, ballast kind), the most wins.
    kinds, kind_of = np.unique(ballast, return_inverse=True)
    cell = inv * kinds.size + np.asarray(kind_of).ravel()  # (group, kind) as one index
    per_kind = np.bincount(cell, minlength=ng * kinds.size).reshape(ng, kinds.size)
    return GroupSums(
        area_id=uniq[:, 0].astype(np.int64),
        lamp_type_id=uniq[:, 1].astype(np.int64),
        count=total(),
        hours=total(pos.age_h),
        starts=total(pos.starts),
        volt_h=total(pos.age_h * pos.voltage_v),
        volt_sum=total(pos.voltage_v),
        rate_sum=total(np.nan_to_num(pos.burn_h_per_week)),
        dominant=kinds[per_kind.argmax(axis=1)] if kinds.size else kinds,
        cluster_age=group_ages(pos.area_id, inv, pos.installed_at_s, pos.age_h, ng),
    )


@dataclass(frozen=True, kw_only=True)
class AreaBasis:
    """An area's burn rate and how its group age is found."""

    weekly: float  # burn hours per week
    basis: str  # "override" | "last_group_relamp" | "installation_dates" | "mean_position_age"
    last_at: datetime | None
    positions: int
    fixtures: int = 0  # distinct fixtures among the area's positions (for cleaning labour)


def area_basis(
    area: Area,
    gidx: list[int],
    sums: GroupSums,
    over: PlanOverrides,
    last_at: datetime | None,
    fixtures: int = 0,
) -> AreaBasis:
    """The area's weekly burn hours (schedule, else measured, else override) and age basis."""
    n_area = int(sum(int(sums.count[g]) for g in gidx))
    weekly = area.burn_hours_per_week
    if weekly <= 0 and n_area > 0:  # no schedule: the measured rate, if any
        weekly = float(sum(sums.rate_sum[g] for g in gidx) / n_area)
    if over.weekly_burn_hours is not None:
        weekly = over.weekly_burn_hours
    if over.group_age_h is not None:
        basis = "override"
    elif last_at is not None and weekly > 0:
        basis = "last_group_relamp"
    elif any(math.isfinite(float(sums.cluster_age[g])) for g in gidx):
        basis = "installation_dates"
    else:
        basis = "mean_position_age"
    return AreaBasis(
        weekly=weekly, basis=basis, last_at=last_at, positions=n_area, fixtures=fixtures
    )


def group_conditions(
    g: int, sums: GroupSums, area: Area, over: PlanOverrides
) -> tuple[float, str, float | None]:
    """(volts, voltage basis, hours per start) of one group."""
    if over.voltage_v is not None:
        volts, vbasis = over.voltage_v, "override"
    elif sums.hours[g] > 0:
        volts, vbasis = sums.volt_h[g] / sums.hours[g], "burn_hour_weighted_mean"
    else:
        volts, vbasis = sums.volt_sum[g] / sums.count[g], "mean_of_positions"
    volts = round(round(volts / VOLTAGE_STEP_V) * VOLTAGE_STEP_V, 6)
    if over.hours_per_start is not None:
        hps: float | None = over.hours_per_start
    elif area.hours_per_start is not None:
        hps = area.hours_per_start
    elif sums.starts[g] > 0 and sums.hours[g] > 0:
        hps = round(sums.hours[g] / sums.starts[g], 3)
    else:
        hps = None
    return float(volts), vbasis, hps


@dataclass(frozen=True, kw_only=True)
class AreaTerms:
    """An area's share of its groups' cost inputs and conditions, read from the ORM once."""

    lamp_price: float | None  # the what-if price, else each model's unit price
    labour_rate_per_h: float
    group_minutes_per_lamp: float
    spot_minutes_per_lamp: float
    equipment_hire_per_visit: float
    area_positions: int
    spot_lamps_per_visit: float
    mercury_fee: float  # disposal fee per lamp, charged for mercury lamps only
    energy_price_per_kwh: float
    relamp_cleans: bool
    cleaning_labour_per_position: float
    light_floor: float | None  # fraction of initial light
    burnout_ceiling: float | None  # share of positions
    rupture_fraction: float
    dirt: DirtRegime
    weekly_burn_hours: float


def area_terms(site: Site, area: Area, ab: AreaBasis, over: PlanOverrides) -> AreaTerms:
    """The parts of group_inputs that depend on the site, the area and the overrides only."""
    return AreaTerms(
        lamp_price=over.lamp_price,
        labour_rate_per_h=_pick(over.labour_rate_per_h, site.labour_rate_per_h),
        group_minutes_per_lamp=_pick(over.group_minutes_per_lamp, area.group_minutes_per_lamp),
        spot_minutes_per_lamp=_pick(over.spot_minutes_per_lamp, area.spot_minutes_per_lamp),
        equipment_hire_per_visit=_pick(
            over.equipment_hire_per_visit, area.equipment_hire_per_visit
        ),
        area_positions=max(ab.positions, 1),
        spot_lamps_per_visit=_pick(over.spot_lamps_per_visit, 1.0),
        mercury_fee=_pick(over.disposal_fee_per_lamp, site.disposal_fee_per_mercury_lamp),
        energy_price_per_kwh=_pick(over.energy_price_per_kwh, site.energy_price_per_kwh),
        relamp_cleans=area.relamp_includes_cleaning,
        cleaning_labour_per_position=_cleaning(area, site, over, ab.fixtures, ab.positions),
        light_floor=over.light_floor if over.light_floor is not None else area.light_floor,
        burnout_ceiling=(
            over.burnout_ceiling if over.burnout_ceiling is not None else area.burnout_ceiling
        ),
        rupture_fraction=_pick(over.rupture_cap_fraction, DEFAULT_RUPTURE_FRACTION),
        dirt=regime_of(area),
        weekly_burn_hours=ab.weekly,
    )


def terms_inputs(
    model: LampModel, t: AreaTerms, volts: float, hps: float | None
) -> tuple[CostInputs, Conditions]:
    """group_inputs from the area's terms: what a group's positions cost and its conditions."""
    costs = CostInputs(
        lamp_price=t.lamp_price if t.lamp_price is not None else model.unit_price,
        labour_rate_per_h=t.labour_rate_per_h,
        group_minutes_per_lamp=t.group_minutes_per_lamp,
        spot_minutes_per_lamp=t.spot_minutes_per_lamp,
        equipment_hire_per_visit=t.equipment_hire_per_visit,
        area_positions=t.area_positions,
        spot_lamps_per_visit=t.spot_lamps_per_visit,
        disposal_fee_per_lamp=t.mercury_fee if model.contains_mercury else 0.0,
        energy_price_per_kwh=t.energy_price_per_kwh,
        lamp_watts=model.rated_watts,
        relamp_cleans=t.relamp_cleans,
        cleaning_labour_per_position=t.cleaning_labour_per_position,
    )
    cond = Conditions(
        voltage_v=volts,
        hours_per_start=hps,
        light_floor=t.light_floor,
        burnout_ceiling=t.burnout_ceiling,
        rupture_fraction=t.rupture_fraction,
        dirt=t.dirt,
        weekly_burn_hours=t.weekly_burn_hours,
    )
    return costs, cond


def group_inputs(
    model: LampModel,
    site: Site,
    area: Area,
    ab: AreaBasis,
    volts: float,
    hps: float | None,
    over: PlanOverrides,
) -> tuple[CostInputs, Conditions]:
    """What a group's positions cost to relamp and the conditions it runs under."""
    return terms_inputs(model, area_terms(site, area, ab, over), volts, hps)


def group_age(ab: AreaBasis, g: int, sums: GroupSums, over: PlanOverrides, at: datetime) -> float:
    """Burn hours of the group's lamps: override, since the last group relamp, from clustered
    installation dates, or the mean."""
    if ab.basis == "override":
        return float(over.group_age_h or 0.0)
    if ab.basis == "last_group_relamp" and ab.last_at is not None:
        return ab.weekly * max((at - ab.last_at).total_seconds(), 0.0) / (168.0 * 3600.0)
    if ab.basis == "installation_dates" and math.isfinite(float(sums.cluster_age[g])):
        return float(sums.cluster_age[g])
    return float(sums.hours[g] / sums.count[g])


@dataclass(frozen=True, kw_only=True)
class _Pending:
    """A group's inputs before its interval is searched."""

    area_id: int
    g: int
    model: LampModel
    volts: float
    vbasis: str
    hps: float | None
    costs: CostInputs
    cond: Conditions


def _group_points(
    sums: GroupSums, over: PlanOverrides
) -> tuple[list[float], list[str], list[float | None]]:
    """Every group's (volts, voltage basis, measured hours per start) at once: group_conditions
    but for the area's schedule, which the caller puts before the measured cycle."""
    n = sums.count.size
    if over.voltage_v is not None:
        raw, basis = [float(over.voltage_v)] * n, ["override"] * n
    else:
        burned = sums.hours > 0
        with np.errstate(divide="ignore", invalid="ignore"):
            mean_v = np.where(burned, sums.volt_h / sums.hours, sums.volt_sum / sums.count)
        raw = mean_v.tolist()
        basis = np.where(burned, "burn_hour_weighted_mean", "mean_of_positions").tolist()
    # Rounded as group_conditions rounds (np.round on the array: the scalar's rounding).
    volts = [round(round(v / VOLTAGE_STEP_V) * VOLTAGE_STEP_V, 6) for v in raw]
    cycled = (sums.starts > 0) & (sums.hours > 0)
    with np.errstate(divide="ignore", invalid="ignore"):
        per_start = np.round(sums.hours / np.where(cycled, sums.starts, 1.0), 3)
    hps = [h if c else None for h, c in zip(per_start.tolist(), cycled.tolist(), strict=True)]
    return volts, basis, hps


def _pending(
    site: Site,
    areas: Sequence[Area],
    sums: GroupSums,
    bases: Mapping[int, AreaBasis],
    models: Mapping[tuple[int, str], LampModel],
    over: PlanOverrides,
) -> list[_Pending]:
    """Every group's inputs, areas in the given order (pure; the ORM read once per area)."""
    by_area = sums.by_area()
    volts, vbasis, measured_hps = _group_points(sums, over)
    type_ids, dominant = sums.lamp_type_id.tolist(), sums.dominant.tolist()
    out = []
    for area in areas:
        gidx = by_area.get(area.id, [])
        if not gidx:
            continue
        terms = area_terms(site, area, bases[area.id], over)
        if over.hours_per_start is not None:
            area_hps: float | None = over.hours_per_start
        else:
            area_hps = area.hours_per_start
        for g in gidx:
            model = models[(type_ids[g], dominant[g])]
            hps = area_hps if area_hps is not None else measured_hps[g]
            costs, cond = terms_inputs(model, terms, volts[g], hps)
            out.append(
                _Pending(
                    area_id=area.id,
                    g=g,
                    model=model,
                    volts=volts[g],
                    vbasis=vbasis[g],
                    hps=hps,
                    costs=costs,
                    cond=cond,
                )
            )
    return out


def plan_areas(
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
    models: dict[tuple[int, str], LampModel] = {}
    curves: dict[int, CurveInUse] = {}
    ballast = np.zeros(0, dtype="<U12")
    if pos.size:
        models, curves, ballast = _models(session, pos)
    return compute_plans(
        PlanInputs(
            site=site,
            areas=areas,
            pos=pos,
            ballast=ballast,
            models=models,
            curves=curves,
            at=at,
            last_relamps=last_relamps,
        ),
        over or PlanOverrides(),
        cache or PlanCache(),
    )


@dataclass(frozen=True, kw_only=True)
class PlanInputs:
    """Everything a site's area plans are computed from (loaded by plan_areas)."""

    site: Site
    areas: Sequence[Area]
    pos: PositionArrays
    ballast: NDArray[np.str_]  # each position's resolved ballast kind
    models: Mapping[tuple[int, str], LampModel]  # by (lamp type, ballast kind)
    curves: Mapping[int, CurveInUse]  # by lamp type
    at: datetime
    last_relamps: Mapping[int, datetime]  # last completed group relamp by area


@dataclass(frozen=True, kw_only=True)
class SitePending:
    """A site's groups with their inputs, before the interval search (compute_plans)."""

    inp: PlanInputs
    sums: GroupSums
    bases: Mapping[int, AreaBasis]
    pending: list[_Pending]

    def items(self) -> list[tuple[LampModel, CostInputs, Conditions]]:
        """The interval-search inputs of every group."""
        return [(p.model, p.costs, p.cond) for p in self.pending]


def pending_plans(inp: PlanInputs, over: PlanOverrides) -> SitePending:
    """Group sums, area bases and every group's inputs (pure)."""
    sums = group_sums(inp.pos, inp.ballast)
    by_area = sums.by_area()
    n_fix = fixtures_by_area(inp.pos.area_id, inp.pos.fixture_id)
    bases = {
        a.id: area_basis(
            a, by_area.get(a.id, []), sums, over, inp.last_relamps.get(a.id), n_fix.get(a.id, 0)
        )
        for a in inp.areas
    }
    pending = _pending(inp.site, inp.areas, sums, bases, inp.models, over)
    return SitePending(inp=inp, sums=sums, bases=bases, pending=pending)


def assemble_plans(
    sp: SitePending, plans: Sequence[GroupPlan], over: PlanOverrides
) -> list[AreaPlan]:
    """The area plans from the groups' inputs and their searched intervals (pure)."""
    inp, sums, bases = sp.inp, sp.sums, sp.bases
    today = local_today(inp.site, inp.at)
    groups: dict[int, list[TypeGroup]] = {a.id: [] for a in inp.areas}
    for p, gp in zip(sp.pending, plans, strict=True):
        if over.objective == MEGALUMEN:
            gp = megalumen_plan(p.model, p.costs, p.cond, gp)
        ab = bases[p.area_id]
        age = group_age(ab, p.g, sums, over, inp.at)
        due, overdue = due_date(today, gp.plan.interval_h, age, ab.weekly)
        lt_id = int(sums.lamp_type_id[p.g])
        groups[p.area_id].append(
            TypeGroup(
                lt_id,
                p.model,
                int(sums.count[p.g]),
                p.volts,
                p.vbasis,
                p.hps,
                p.costs,
                p.cond,
                gp,
                age,
                due,
                overdue,
                inp.curves.get(lt_id),
            )
        )
    return [
        AreaPlan(
            a,
            inp.site,
            inp.at,
            bases[a.id].positions,
            bases[a.id].weekly,
            bases[a.id].basis,
            bases[a.id].last_at,
            inp.pos.source,
            groups[a.id],
        )
        for a in inp.areas
    ]


def compute_plans(inp: PlanInputs, over: PlanOverrides, cache: PlanCache) -> list[AreaPlan]:
    """The area plans from loaded inputs (pure: no database); one bulk interval search."""
    sp = pending_plans(inp, over)
    return assemble_plans(sp, cache.get_many(sp.items()), over)


def _cleaning(area: Area, site: Site, over: PlanOverrides, fixtures: int, positions: int) -> float:
    """Cleaning labour per position of the area's group visit (planning/maintained.py)."""
    rate = _pick(over.labour_rate_per_h, site.labour_rate_per_h)
    minutes = area.cleaning_minutes_per_fixture
    return cleaning_labour_per_position(minutes, rate, fixtures, positions)


def _pick(value: float | None, default: float) -> float:
    """The override if given, else the default, as a float."""
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
