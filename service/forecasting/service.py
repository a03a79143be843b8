"""Forecasts for a fixture, area, site or lamp type, from the register and the readings.

Per position (numeric core: service.reliability.fleet.evaluate_fleet, with each lamp
type's curve chosen by the field fit, see catalogue.resolved / forecasting.fit; a discharge
lamp's voltage response follows its fixture's ballast kind, see catalogue.resolved):

- survival now: S(age) of the lamp in the socket (0 for a dark position), the age
  accumulated over the past supply as exposure (readings.ages history; the supply ahead is
  the readings' burn-hour-weighted mean);
- P(fail within the horizon): 1 - S(age + w)/S(age); the horizon in weeks becomes burn
  hours w with the area's burn rate (schedule, else measured);
- expected burnouts with spot replacement over the horizon: per-position delayed renewal
  from the lamp's current age (forecasting.spot_replacements); a dark position counts as a new lamp
  going in now;
- lumen fraction now (dark = 0) and at the horizon end (dark positions relamped), each
  the maintained light (reliability/dirt.maintained_light, the one definition plans use
  too): lamp lumen depreciation at the age x the luminaire dirt factor of the area's CIE 97
  regime at the time since cleaning (forecasting/dirt.py) x the voltage light factor;
- a 90 % range for the count of burning lamps that burn out within the horizon
  (burnouts_low/high): Poisson-binomial over positions plus the life curves' parameter
  uncertainty by the delta method (forecasting/ranges.py, reliability/uncertainty.py);
- per area, the dates it crosses its light floor (mean lumen fraction of its lamps, burnouts
  spot-replaced, falls below Area.light_floor) and its burnout ceiling (share of positions
  whose current lamp has burned out if none were replaced, 1 - mean S(age + t), rises above
  Area.burnout_ceiling), found by bisection in burn hours and turned into dates with the
  area's burn rate, in the site's time zone; None when not within CROSSING_YEARS
  (forecasting/crossings.py: one bisection over the areas still open, both limits).
"""

from __future__ import annotations

from dataclasses import dataclass, field
from datetime import datetime, timedelta
from typing import Any
from zoneinfo import ZoneInfo

import numpy as np
from numpy.typing import NDArray
from sqlalchemy import select
from sqlalchemy.orm import Session

from service.catalogue.resolved import CurveInUse, TypeTable
from service.db.base import utcnow
from service.forecasting.crossings import crossings, positions_by_row
from service.forecasting.dirt import PositionDirt, no_dirt, position_dirt
from service.forecasting.fit import load_fitted_types
from service.forecasting.ranges import ParamSpread, param_spread
from service.forecasting.spot_replacements import expected_replacements
from service.readings.ages import PositionAges, position_ages
from service.register.models import Area, Site
from service.reliability.fleet import FleetResult, evaluate_fleet
from service.reliability.uncertainty import CountRange

FloatArray = NDArray[np.float64]
IntArray = NDArray[np.int64]

_H_PER_WEEK = 168.0


@dataclass(frozen=True)
class PositionForecast:
    """Per-position arrays of a forecast (aligned with ages)."""

    ages: PositionAges
    fleet: FleetResult
    survival: FloatArray
    p_fail: FloatArray
    expected_burnouts: FloatArray
    lumen_now: FloatArray
    lumen_end: FloatArray
    horizon_h: FloatArray
    type_row: IntArray  # each position's row in the type table (found once per forecast)
    dirt: PositionDirt  # each position's luminaire dirt regime (forecasting/dirt.py)
    spread: ParamSpread  # gradients and parameter spreads for burnout ranges (ranges.py)


@dataclass(frozen=True)
class Summary:
    """Aggregates over a group of positions."""

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
    supply_faults: int = 0  # discharge lamps below their ballast's band: no life credit
    burnouts_low: int = 0  # 90 % range of expected_failures_no_replacement (ranges.py)
    burnouts_high: int = 0


@dataclass(frozen=True)
class AreaForecast:
    """An area's summary and its floor and ceiling crossing dates."""

    area_id: int
    name: str
    burn_h_per_week: float
    light_floor: float | None
    burnout_ceiling: float | None
    light_floor_date: datetime | None
    burnout_ceiling_date: datetime | None
    summary: Summary


@dataclass(frozen=True)
class Forecast:
    """A forecast over a scope: totals, areas, curves in use and per-position arrays."""

    at: datetime
    horizon_weeks: float
    time_zone: str
    summary: Summary
    areas: list[AreaForecast]
    curves: dict[int, CurveInUse]
    positions: PositionForecast
    extra: dict[str, Any] = field(default_factory=dict)


def evaluate_positions(
    ages: PositionAges,
    types: TypeTable,
    horizon_weeks: float,
    dirt: PositionDirt | None = None,
) -> PositionForecast:
    """Run the numeric core over positions (dark positions as new lamps going in now)."""
    k = types.index(ages.lamp_type_id, ages.ballast_kind)
    dark = ages.burned_out
    age = np.where(dark, 0.0, ages.age_h)
    horizon_h = horizon_weeks * ages.burn_h_per_week
    dirt = dirt if dirt is not None else no_dirt(ages.size)
    # Wear accumulated over the past supply (cumulative exposure); dark = a new lamp now.
    res = evaluate_fleet(
        types.table,
        k,
        age,
        ages.voltage_v,
        ages.hours_per_start,
        horizon_h,
        history=ages.history.drop_rows(dark),
        luminaire_factor=dirt.factor(0.0),
        luminaire_factor_end=dirt.factor(horizon_h),
    )
    ahead = expected_replacements(types.table.shape, k, res.scale_h, res.effective_age_h, horizon_h)
    return PositionForecast(
        ages=ages,
        fleet=res,
        survival=np.where(dark, 0.0, res.survival),
        p_fail=res.p_fail_horizon,
        expected_burnouts=ahead,
        lumen_now=np.where(dark, 0.0, res.lumen_fraction),
        lumen_end=res.lumen_fraction_end,
        horizon_h=horizon_h,
        type_row=k,
        dirt=dirt,
        spread=param_spread(
            types, ages.lamp_type_id, k, res.effective_age_h, horizon_h, res.scale_h
        ),
    )


def _live(pf: PositionForecast, sel: Any = slice(None)) -> IntArray:
    """The burning positions of a selection as ascending indices: the same elements in the
    same order as a full-length mask would select, without a pass over every position."""
    live: IntArray = np.arange(pf.ages.size)[sel][~pf.ages.burned_out[sel]]
    return live


def _summary(
    pf: PositionForecast, sel: Any = slice(None), rng: CountRange | None = None
) -> Summary:
    """Aggregates of the selected positions; rng: their burnout range if already computed."""
    dark = pf.ages.burned_out[sel]
    n = int(dark.size)
    burning = ~dark
    nb = int(burning.sum())

    def mean(x: FloatArray) -> float:
        return float(x.mean()) if x.size else 0.0

    p_fail = pf.p_fail[sel]
    rng = pf.spread.count(pf.p_fail, _live(pf, sel)) if rng is None else rng
    return Summary(
        positions=n,
        burning=nb,
        dark=n - nb,
        mean_age_h=mean(pf.ages.age_h[sel]),
        survival_now=mean(pf.survival[sel]),
        p_fail_horizon=mean(p_fail[burning]),
        expected_failures_no_replacement=float(p_fail[burning].sum()),
        expected_burnouts_spot=float(pf.expected_burnouts[sel].sum()),
        lumen_fraction_now=mean(pf.lumen_now[sel]),
        lumen_fraction_end=mean(pf.lumen_end[sel]),
        voltage_warnings=int(pf.fleet.warn_voltage[sel].sum()),
        switching_warnings=int(pf.fleet.warn_switching[sel].sum()),
        supply_faults=int(pf.fleet.warn_supply_fault[sel].sum()),
        burnouts_low=rng.low,
        burnouts_high=rng.high,
    )


def _to_date(at: datetime, hours_ahead: float, rate_week: float, zone: ZoneInfo) -> datetime | None:
    if np.isnan(hours_ahead) or rate_week <= 0:
        return None
    return (at + timedelta(hours=hours_ahead / rate_week * _H_PER_WEEK)).astimezone(zone)


def forecast(
    session: Session,
    *,
    site_id: int | None = None,
    area_id: int | None = None,
    fixture_id: int | None = None,
    lamp_type_id: int | None = None,
    horizon_weeks: float = 13.0,
    at: datetime | None = None,
) -> Forecast:
    """Forecast every position of a scope, with per-area totals and crossing dates."""
    at = utcnow() if at is None else at
    ages = position_ages(
        session,
        site_id=site_id,
        area_id=area_id,
        fixture_id=fixture_id,
        lamp_type_id=lamp_type_id,
        at=at,
        active_only=True,  # retired fixtures get no future work
    )
    types = load_fitted_types(
        session, ages.lamp_type_id, field_fit=True, ballast_kinds=ages.ballast_kind
    )
    pf = evaluate_positions(ages, types, horizon_weeks, position_dirt(session, ages, at))
    curves = {int(i): c for i, c in zip(types.ids.tolist(), types.curves, strict=True)}

    area_ids, group = np.unique(ages.area_id, return_inverse=True)
    rows = (
        session.execute(
            select(Area.id, Area.name, Area.light_floor, Area.burnout_ceiling, Site.time_zone)
            .join(Site, Site.id == Area.site_id)
            .where(Area.id.in_(area_ids.tolist()))
        ).all()
        if area_ids.size
        else []
    )
    info = {int(r[0]): r for r in rows}
    zones = {r[4] for r in rows}
    zone_name = zones.pop() if len(zones) == 1 else "UTC"
    n_g = int(area_ids.size)
    rate = np.bincount(group, weights=ages.burn_h_per_week, minlength=n_g) / np.maximum(
        np.bincount(group, minlength=n_g), 1
    )
    floor = np.array(
        [np.nan if info[a][2] is None else info[a][2] for a in area_ids.tolist()], dtype=float
    )
    ceiling = np.array(
        [np.nan if info[a][3] is None else info[a][3] for a in area_ids.tolist()], dtype=float
    )
    group = group.astype(np.int64)
    floor_h, ceil_h = crossings(pf, types, group, floor, ceiling, rate) if n_g else (floor, ceiling)

    areas: list[AreaForecast] = []
    members = positions_by_row(group)  # each area's positions, ascending (one sort)
    # Every area's burnout range and the scope's in one batch (the same ranges as one by one).
    ranges = pf.spread.counts([*(_live(pf, m[1]) for m in members), _live(pf)])
    for g, a in enumerate(area_ids.tolist()):
        zone = ZoneInfo(info[a][4])
        areas.append(
            AreaForecast(
                area_id=int(a),
                name=str(info[a][1]),
                burn_h_per_week=float(rate[g]),
                light_floor=info[a][2],
                burnout_ceiling=info[a][3],
                light_floor_date=_to_date(at, float(floor_h[g]), float(rate[g]), zone),
                burnout_ceiling_date=_to_date(at, float(ceil_h[g]), float(rate[g]), zone),
                summary=_summary(pf, members[g][1], ranges[g]),
            )
        )
    return Forecast(
        at=at.astimezone(ZoneInfo(zone_name)),
        horizon_weeks=horizon_weeks,
        time_zone=zone_name,
        summary=_summary(pf, rng=ranges[-1]),
        areas=areas,
        curves=curves,
        positions=pf,
    )
