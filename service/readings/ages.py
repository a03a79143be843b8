"""Each lamp position's age (burn hours, starts) and operating voltage, for many at once.

Method (all vectorised; a handful of queries whatever the number of positions):

- Burn hours: a fixture's own records if it has any, else its area's records; outside the
  metered span (before the first record, after the last) the area's schedule accrues hours
  (Area.burn_hours_per_week). Age = hours_at_install + B(t_end) - B(lamp_installed_at), with
  t_end = `at`, or the burnout time for a position reported dark (a dark lamp ages no more).
  See service.readings.timeline.
- Starts: the same with recorded starts and the schedule's starts (starts_per_day x
  days_per_week / 7 per day). Hours per start: measured when the records carry starts over
  the lamp's life, else the area's schedule, else NaN (unknown: the rated cycle is assumed).
- Voltage, by precedence: the burn-hour-weighted mean of the readings over the lamp's life
  (each reading holds until the next one; the last one before the lamp went in counts from
  the install), "readings_weighted"; else the latest reading, "latest_reading"; else the
  fixture's measured volts, "fixture_measured"; else the site's nominal, "site_nominal".
  A fixture's own readings win over its area's. The readings part is in operating_voltage.py.
- Exposure history: the readings' burn-hour segments of each lamp (operating_voltage.py); its
  hours not under any reading (before the first reading, and hours it had when it went in)
  are one more segment at the fixture's measured volts, else the site's nominal. The numeric
  core accumulates wear over them (PositionAges.history; service.reliability.exposure).
- Ballast: the fixture's ballast kind (Fixture.ballast_kind), read as a code in the same
  query; catalogue.resolved decides which ballast the lamp actually runs on.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field, replace
from datetime import datetime
from typing import Any

import numpy as np
from numpy.typing import NDArray
from sqlalchemy import ColumnElement, case, func, or_, select
from sqlalchemy.orm import Session

from service.db.base import utcnow
from service.readings.models import BurnHourRecord
from service.readings.operating_voltage import reading_voltages
from service.readings.repository import epoch, float_matrix, target_keys
from service.readings.timeline import Clock, Timeline
from service.register.models import Area, Fixture, LampPosition, Site
from service.reliability.exposure import ExposureHistory
from service.reliability.technologies import BALLASTS

FloatArray = NDArray[np.float64]
IntArray = NDArray[np.int64]
BoolArray = NDArray[np.bool_]

VOLTAGE_SOURCES = ("readings_weighted", "latest_reading", "fixture_measured", "site_nominal")
_HOURS_PER_WEEK = 168.0
# Window (days) for an area's measured burn rate when it has no schedule.
RATE_WINDOW_DAYS = 28.0
# Ballast kinds as numbers in the numeric query; code -1 (unknown) maps to the last name "".
_BALLAST_CODE = {b: i for i, b in enumerate(BALLASTS)}
_BALLAST_NAMES = np.array([*BALLASTS, ""], dtype="<U12")


@dataclass(frozen=True)
class PositionAges:
    """Per lamp position (parallel numpy arrays): where it is, its lamp's age and voltage."""

    position_id: IntArray
    fixture_id: IntArray
    area_id: IntArray
    site_id: IntArray
    lamp_type_id: IntArray
    ballast_kind: NDArray[np.str_]  # the fixture's ballast kind ("" if not a known kind)
    age_h: FloatArray  # burn hours of the lamp now in it, incl. hours_at_install
    starts: FloatArray  # starts of that lamp, incl. starts_at_install
    hours_per_start: FloatArray  # burn hours per start; NaN = unknown (rated cycle assumed)
    voltage_v: FloatArray  # operating volts
    voltage_source: NDArray[np.str_]  # one of VOLTAGE_SOURCES
    burned_out: BoolArray  # reported dark, not yet replaced
    installed_at_s: FloatArray  # when the lamp went in, epoch seconds (UTC)
    burn_h_per_week: FloatArray  # the area's burn rate: schedule, else measured recently
    at: datetime  # the moment the ages refer to (UTC)
    # Past supply by burn-hour segments (rows of these arrays): wear is accumulated over it.
    history: ExposureHistory = field(default_factory=ExposureHistory.empty)

    @property
    def size(self) -> int:
        """Number of positions."""
        return int(self.position_id.size)

    def row(self, i: int) -> dict[str, Any]:
        """Position i's place, age and voltage as plain values (NaN hours per start: None)."""
        hps = float(self.hours_per_start[i])
        return {
            "position_id": int(self.position_id[i]),
            "fixture_id": int(self.fixture_id[i]),
            "area_id": int(self.area_id[i]),
            "lamp_type_id": int(self.lamp_type_id[i]),
            "age_h": float(self.age_h[i]),
            "hours_per_start": None if math.isnan(hps) else hps,
            "voltage_v": float(self.voltage_v[i]),
            "voltage_source": str(self.voltage_source[i]),
            "burned_out": bool(self.burned_out[i]),
        }

    def take(self, idx: Any) -> PositionAges:
        """The subset at an index or boolean mask."""
        return PositionAges(
            **{
                name: getattr(self, name)[idx]
                for name in self.__dataclass_fields__
                if name not in ("at", "history")
            },
            at=self.at,
            history=self.history.take(idx, self.size),
        )


def _scope(
    site_id: int | None,
    area_id: int | None,
    fixture_id: int | None,
    lamp_type_id: int | None,
    position_ids: list[int] | None,
) -> list[ColumnElement[bool]]:
    cond: list[ColumnElement[bool]] = []
    if site_id is not None:
        cond.append(Fixture.site_id == site_id)
    if area_id is not None:
        cond.append(Fixture.area_id == area_id)
    if fixture_id is not None:
        cond.append(Fixture.id == fixture_id)
    if lamp_type_id is not None:
        cond.append(Fixture.lamp_type_id == lamp_type_id)
    if position_ids is not None:
        cond.append(LampPosition.id.in_(position_ids))
    return cond


def _fixture_scope(fixture_cond: list[ColumnElement[bool]], position_ids: list[int] | None) -> Any:
    """Fixtures that may hold positions in scope (a superset: fixture conditions only).

    None for every fixture. The records and readings of its fixtures without positions in
    scope are loaded too and never looked up: results are as for the exact scope, and the
    query is a plain scan of the fixtures instead of their join with the positions, which
    the old subquery repeated in every query (about 0.5 s each at 100,000 positions).
    """
    cond = list(fixture_cond)
    if position_ids is not None:
        some = select(LampPosition.fixture_id).where(LampPosition.id.in_(position_ids))
        cond.append(Fixture.id.in_(some))
    return select(Fixture.id).where(*cond) if cond else None


def in_scope(column: Any, scope: Any) -> ColumnElement[bool]:
    """column IN (scope), or NOT NULL when the scope is every fixture."""
    out: ColumnElement[bool] = column.is_not(None) if scope is None else column.in_(scope)
    return out


def empty_ages(at: datetime) -> PositionAges:
    """Ages of no positions."""
    i = np.zeros(0, dtype=np.int64)
    f = np.zeros(0, dtype=np.float64)
    b = np.zeros(0, dtype="<U12")
    return PositionAges(
        i, i, i, i, i, b, f, f, f, f, np.zeros(0, dtype="<U17"), np.zeros(0, bool), f, f, at
    )


def positions_select(cond: list[ColumnElement[bool]], dialect: str) -> Any:
    """The numeric query of the positions in scope (one row each, the columns compute_ages reads)."""
    return (
        select(
            LampPosition.id,
            LampPosition.fixture_id,
            Fixture.area_id,
            Fixture.site_id,
            Fixture.lamp_type_id,
            epoch(LampPosition.lamp_installed_at, dialect),
            LampPosition.hours_at_install,
            LampPosition.starts_at_install,
            epoch(LampPosition.burned_out_at, dialect),
            Fixture.measured_voltage_v,
            case(_BALLAST_CODE, value=Fixture.ballast_kind, else_=-1),
        )
        .join(Fixture, Fixture.id == LampPosition.fixture_id)
        .where(*cond)
    )


def _load_positions(session: Session, cond: list[ColumnElement[bool]], dialect: str) -> FloatArray:
    """One row per position in scope (positions_select), in position id order."""
    matrix = float_matrix(session, positions_select(cond, dialect), 11)
    # Sorted here rather than by the database: ids are unique, and numpy's sort of a few
    # hundred thousand floats is quicker than the server's (which may spill to disk).
    out: FloatArray = matrix[np.argsort(matrix[:, 0], kind="stable")]
    return out


@dataclass(frozen=True, kw_only=True)
class AreaRates:
    """Per area (sorted by id): scheduled burn hours and starts a week, site nominal volts."""

    area_id: IntArray
    week_h: FloatArray
    starts_week: FloatArray
    nominal_v: FloatArray

    def of(self, area_of: IntArray) -> tuple[FloatArray, FloatArray, FloatArray]:
        """(weekly hours, weekly starts, nominal volts) of each position's area."""
        ai = np.searchsorted(self.area_id, area_of)
        return self.week_h[ai], self.starts_week[ai], self.nominal_v[ai]


def _load_areas(session: Session, area_ids: IntArray) -> AreaRates:
    """The areas' schedules and their sites' nominal volts: one query, a few rows."""
    rows = session.execute(
        select(
            Area.id,
            Area.weekly_burn_hours,
            Area.hours_per_day,
            Area.days_per_week,
            Area.starts_per_day,
            Site.nominal_voltage_v,
        )
        .join(Site, Site.id == Area.site_id)
        .where(Area.id.in_([int(a) for a in np.unique(area_ids)]))
    ).all()
    week = [
        r[1]
        if r[1] is not None
        else (r[2] * r[3] if r[2] is not None and r[3] is not None else 0.0)
        for r in rows
    ]
    starts = [(r[4] or 0.0) * (r[3] if r[3] is not None else 7.0) for r in rows]
    ids = np.array([r[0] for r in rows], dtype=np.int64)
    order = np.argsort(ids)
    return AreaRates(
        area_id=ids[order],
        week_h=np.array(week, dtype=np.float64)[order],
        starts_week=np.array(starts, dtype=np.float64)[order],
        nominal_v=np.array([r[5] for r in rows], dtype=np.float64)[order],
    )


def _load_records(
    session: Session, fixture_scope: Any, area_ids: list[int], since: datetime, at: datetime
) -> tuple[IntArray, FloatArray]:
    """Fixtures in scope that carry their own burn-hour records, and the records themselves.

    fixture_scope may be a superset (_fixture_scope): extra fixtures are never looked up.
    """
    dialect = session.connection().dialect.name
    own_fixtures = np.array(
        session.scalars(
            select(BurnHourRecord.fixture_id)
            # IS NOT NULL spelled out (IN never matches NULL, so the same rows): PostgreSQL
            # then reads the few fixture records from their index instead of hashing every
            # fixture in scope against every area record (70 ms to 0.1 ms at 100,000
            # positions with area records only).
            .where(
                BurnHourRecord.fixture_id.is_not(None),
                in_scope(BurnHourRecord.fixture_id, fixture_scope),
            )
            .distinct()
        ).all(),
        dtype=np.int64,
    )
    # Only fixtures with records of their own can have any (none: the area records only).
    target: ColumnElement[bool] = BurnHourRecord.area_id.in_(area_ids)
    if own_fixtures.size:
        target = or_(target, in_scope(BurnHourRecord.fixture_id, fixture_scope))
    rec = float_matrix(
        session,
        select(
            func.coalesce(BurnHourRecord.fixture_id * 2 + 1, BurnHourRecord.area_id * 2),
            epoch(BurnHourRecord.period_start, dialect),
            epoch(BurnHourRecord.period_end, dialect),
            BurnHourRecord.hours,
            BurnHourRecord.starts,
        ).where(target, BurnHourRecord.period_end > since, BurnHourRecord.period_start < at),
        5,
    )
    return own_fixtures, rec


@dataclass(frozen=True, kw_only=True)
class AgeInputs:
    """What the ages are computed from (loaded by position_ages)."""

    positions: FloatArray  # _load_positions' matrix
    areas: AreaRates
    own_fixtures: IntArray  # fixtures with their own burn-hour records
    records: FloatArray  # _load_records' matrix
    at: datetime


def records_since(positions: FloatArray, at: datetime) -> datetime:
    """Oldest record end worth loading: the rate window before the first install or `at`."""
    t_min = float(np.nanmin(positions[:, 5]))
    since = datetime.fromtimestamp(t_min - RATE_WINDOW_DAYS * 86_400.0, tz=at.tzinfo)
    late = datetime.fromtimestamp(at.timestamp() - RATE_WINDOW_DAYS * 86_400.0, tz=at.tzinfo)
    return min(since, late)


@dataclass(frozen=True, kw_only=True)
class Aged:
    """Ages, starts and burn rates of each position (compute_ages), before the voltages."""

    ages: PositionAges  # voltage, its source and the history still to fill
    t_start: FloatArray  # when each lamp's life began (epoch s), capped at t_end
    t_end: FloatArray  # `at`, or when it was reported dark
    clock: Clock
    measured_v: FloatArray  # the fixture's measured volts (NaN = none)
    nominal_v: FloatArray  # the site's nominal volts


def compute_ages(inp: AgeInputs) -> Aged:
    """Burn hours, starts, hours per start and burn rate of every position (pure)."""
    m, t_at = inp.positions, inp.at.timestamp()
    pos_id, fix_id, area_of, site_of, type_of = (m[:, j].astype(np.int64) for j in range(5))
    t0, h0, s0, dark_at, fix_v = m[:, 5], m[:, 6], m[:, 7], m[:, 8], m[:, 9]
    week_h, starts_week, nominal_v = inp.areas.of(area_of)
    rate_h = week_h / _HOURS_PER_WEEK  # burn hours per calendar hour
    rate_starts = starts_week / _HOURS_PER_WEEK
    base = float(np.nanmin(np.concatenate((t0, [t_at])))) - 86_400.0
    bkey = target_keys(fix_id, area_of, np.isin(fix_id, inp.own_fixtures))
    timeline = _timeline(inp.records, base)
    clock = Clock.for_keys(timeline, bkey, rate_h, rate_starts)
    t_end = np.where(np.isnan(dark_at), t_at, np.minimum(dark_at, t_at))
    t_start = np.minimum(t0, t_end)
    h_end, s_end = clock.at(t_end)
    h_start, s_start = clock.at(t_start)
    age_h = h0 + np.maximum(h_end - h_start, 0.0)
    starts = s0 + np.maximum(s_end - s_start, 0.0)
    hps = _hours_per_start(timeline, bkey, t_start, t_end, rate_h, rate_starts)
    # Burn rate per week: schedule, else measured over the last RATE_WINDOW_DAYS.
    week_rate = np.where(week_h > 0, week_h, _measured_rate(timeline, bkey, t_at))
    n = pos_id.size
    ages = PositionAges(
        position_id=pos_id,
        fixture_id=fix_id,
        area_id=area_of,
        site_id=site_of,
        lamp_type_id=type_of,
        ballast_kind=_BALLAST_NAMES[np.nan_to_num(m[:, 10], nan=-1.0).astype(np.int64)],
        age_h=age_h,
        starts=starts,
        hours_per_start=hps,
        voltage_v=np.full(n, np.nan),
        voltage_source=np.full(n, "", dtype="<U17"),
        burned_out=~np.isnan(dark_at) & (dark_at <= t_at),
        installed_at_s=t0,
        burn_h_per_week=week_rate,
        at=inp.at,
    )
    return Aged(
        ages=ages, t_start=t_start, t_end=t_end, clock=clock, measured_v=fix_v, nominal_v=nominal_v
    )


def _hours_per_start(
    timeline: Timeline,
    bkey: IntArray,
    t_start: FloatArray,
    t_end: FloatArray,
    rate_h: FloatArray,
    rate_starts: FloatArray,
) -> FloatArray:
    """Recorded starts over the lamp's life, else the schedule, else NaN."""
    rec_h_end, rec_s_end = timeline.metered(bkey, t_end)
    rec_h_start, rec_s_start = timeline.metered(bkey, t_start)
    rec_starts = rec_s_end - rec_s_start
    rec_hours = rec_h_end - rec_h_start
    sched_hps = np.where(
        rate_starts > 0, rate_h / np.where(rate_starts > 0, rate_starts, 1.0), np.nan
    )
    sched_hps = np.where(sched_hps > 0, sched_hps, np.nan)
    with np.errstate(divide="ignore", invalid="ignore"):
        meas_hps = np.where(rec_starts > 0, rec_hours / rec_starts, np.nan)
    out: FloatArray = np.where(np.isfinite(meas_hps) & (meas_hps > 0), meas_hps, sched_hps)
    return out


def with_voltages(
    aged: Aged, volts: FloatArray, source: NDArray[np.str_], history: ExposureHistory
) -> PositionAges:
    """The ages with operating volts by precedence and the exposure history (pure)."""
    fix_v, nominal_v = aged.measured_v, aged.nominal_v
    history = _with_rest(history, aged.ages.age_h, np.where(np.isnan(fix_v), nominal_v, fix_v))
    volts = np.where(np.isnan(volts) & ~np.isnan(fix_v), fix_v, volts)
    source = np.where((source == "") & ~np.isnan(fix_v), "fixture_measured", source)
    volts = np.where(np.isnan(volts), nominal_v, volts)
    source = np.where(source == "", "site_nominal", source).astype("<U17")
    return replace(aged.ages, voltage_v=volts, voltage_source=source, history=history)


def position_ages(
    session: Session,
    *,
    site_id: int | None = None,
    area_id: int | None = None,
    fixture_id: int | None = None,
    at: datetime | None = None,
    lamp_type_id: int | None = None,
    position_ids: list[int] | None = None,
    active_only: bool = False,
) -> PositionAges:
    """Ages, starts and operating voltages of every position in a scope, at a moment.

    active_only leaves out retired fixtures (forecasts and plans of future work). Queries:
    the positions, their areas, the burn-hour records and the voltage readings, each once.
    """
    at = utcnow() if at is None else at
    fixture_cond = _scope(site_id, area_id, fixture_id, lamp_type_id, None)
    if active_only:
        fixture_cond.append(Fixture.retired_at.is_(None))
    cond = [*fixture_cond, *_scope(None, None, None, None, position_ids)]
    matrix = _load_positions(session, cond, session.connection().dialect.name)
    if matrix.shape[0] == 0:
        return empty_ages(at)
    fixture_scope = _fixture_scope(fixture_cond, position_ids)
    area_ids = np.unique(matrix[:, 2]).astype(np.int64)
    areas = _load_areas(session, area_ids)
    area_list = area_ids.tolist()
    own, rec = _load_records(session, fixture_scope, area_list, records_since(matrix, at), at)
    aged = compute_ages(
        AgeInputs(positions=matrix, areas=areas, own_fixtures=own, records=rec, at=at)
    )
    a = aged.ages
    volts, source, history = reading_voltages(
        session,
        fixture_scope,
        area_list,
        a.fixture_id,
        a.area_id,
        at,
        aged.t_start,
        aged.t_end,
        aged.clock,
    )
    return with_voltages(aged, volts, source, history)


def _with_rest(history: ExposureHistory, age_h: FloatArray, rest_v: FloatArray) -> ExposureHistory:
    """Add each lamp's hours under no reading as one segment at rest_v (measured, else nominal)."""
    n = age_h.size
    rest = age_h - history.covered_hours(n)
    has_seg = np.bincount(history.position, minlength=n)[:n] > 0
    rows = np.nonzero(has_seg & (rest > 1e-9))[0]
    if not rows.size:
        return history
    return ExposureHistory(
        np.concatenate((history.position, rows)),
        np.concatenate((history.hours, rest[rows])),
        np.concatenate((history.voltage, rest_v[rows])),
        np.concatenate((history.starts, np.full(rows.size, np.nan))),  # unknown: lamp's mean
    )


def _timeline(rec: FloatArray, base: float) -> Timeline:
    return Timeline.build(
        rec[:, 0].astype(np.int64), rec[:, 1], rec[:, 2], rec[:, 3], rec[:, 4], base
    )


def _measured_rate(timeline: Timeline, key: IntArray, t_at: float) -> FloatArray:
    """Recorded burn hours per week over the recent window (0 without records)."""
    window = RATE_WINDOW_DAYS * 86_400.0
    h_now, _ = timeline.metered(key, np.full(key.shape, t_at))
    h_then, _ = timeline.metered(key, np.full(key.shape, t_at - window))
    first, last = timeline.first_last(key)
    covered = np.minimum(np.nan_to_num(last, nan=t_at), t_at) - np.maximum(
        np.nan_to_num(first, nan=t_at), t_at - window
    )
    with np.errstate(divide="ignore", invalid="ignore"):
        rate = np.where(covered > 0, (h_now - h_then) / covered * 3600.0 * _HOURS_PER_WEEK, 0.0)
    return np.asarray(rate, dtype=np.float64)
