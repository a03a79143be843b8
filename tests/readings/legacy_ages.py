"""Position ages as computed before the load/compute split, kept as a test oracle."""

from __future__ import annotations

from datetime import datetime
from typing import Any

import numpy as np
from sqlalchemy import ColumnElement, Float, case, cast, func, or_, select
from sqlalchemy.orm import Session

from service.db.base import utcnow
from service.readings import ages
from service.readings.models import BurnHourRecord
from service.readings.operating_voltage import reading_voltages
from service.readings.repository import float_matrix, target_keys
from service.readings.timeline import Clock
from service.register.models import Area, Fixture, LampPosition, Site


def _old_epoch(col: Any, dialect: str) -> ColumnElement[float]:
    """Epoch seconds as the old code asked for them (extract, cast to float)."""
    if dialect == "postgresql":
        return cast(func.extract("epoch", col), Float)
    return (func.julianday(col) - 2440587.5) * 86400.0


def legacy_position_ages(  # noqa: PLR0915  (the pre-split code, kept as the test oracle)
    session: Session,
    *,
    site_id: int | None = None,
    area_id: int | None = None,
    fixture_id: int | None = None,
    at: datetime | None = None,
    lamp_type_id: int | None = None,
    position_ids: list[int] | None = None,
    active_only: bool = False,
) -> ages.PositionAges:
    """Ages, starts and operating voltages of every position in a scope, at a moment.

    active_only leaves out retired fixtures (forecasts and plans of future work).
    """
    at = utcnow() if at is None else at
    t_at = at.timestamp()
    cond = ages._scope(site_id, area_id, fixture_id, lamp_type_id, position_ids)
    if active_only:
        cond.append(Fixture.retired_at.is_(None))
    conn = session.connection()
    dialect = conn.dialect.name
    matrix = float_matrix(
        session,
        select(
            LampPosition.id,
            LampPosition.fixture_id,
            Fixture.area_id,
            Fixture.site_id,
            Fixture.lamp_type_id,
            _old_epoch(LampPosition.lamp_installed_at, dialect),
            LampPosition.hours_at_install,
            LampPosition.starts_at_install,
            _old_epoch(LampPosition.burned_out_at, dialect),
            Fixture.measured_voltage_v,
            case(ages._BALLAST_CODE, value=Fixture.ballast_kind, else_=-1),
        )
        .join(Fixture, Fixture.id == LampPosition.fixture_id)
        .where(*cond)
        .order_by(LampPosition.id),
        11,
    )
    if matrix.shape[0] == 0:
        return ages.empty_ages(at)
    pos_id, fix_id, area_of, site_of, type_of = (matrix[:, j].astype(np.int64) for j in range(5))
    t0 = matrix[:, 5]
    h0 = matrix[:, 6]
    s0 = matrix[:, 7]
    dark_at = matrix[:, 8]
    fix_v = matrix[:, 9]
    ballast = ages._BALLAST_NAMES[np.nan_to_num(matrix[:, 10], nan=-1.0).astype(np.int64)]

    # Areas (schedule) and their sites (nominal volts): a few rows.
    fixture_scope = select(Fixture.id).join(LampPosition, LampPosition.fixture_id == Fixture.id)
    fixture_scope = fixture_scope.where(*cond) if cond else fixture_scope
    area_scope = select(Fixture.area_id).where(Fixture.id.in_(fixture_scope))
    area_rows = session.execute(
        select(
            Area.id,
            Area.weekly_burn_hours,
            Area.hours_per_day,
            Area.days_per_week,
            Area.starts_per_day,
            Site.nominal_voltage_v,
        )
        .join(Site, Site.id == Area.site_id)
        .where(Area.id.in_(area_scope))
    ).all()
    a_ids = np.array([r[0] for r in area_rows], dtype=np.int64)
    a_week = np.array(
        [
            r[1]
            if r[1] is not None
            else (r[2] * r[3] if r[2] is not None and r[3] is not None else 0.0)
            for r in area_rows
        ],
        dtype=np.float64,
    )
    a_starts_week = np.array(
        [(r[4] or 0.0) * (r[3] if r[3] is not None else 7.0) for r in area_rows], dtype=np.float64
    )
    a_nominal = np.array([r[5] for r in area_rows], dtype=np.float64)
    order = np.argsort(a_ids)
    a_ids, a_week, a_starts_week, a_nominal = (
        a_ids[order],
        a_week[order],
        a_starts_week[order],
        a_nominal[order],
    )
    ai = np.searchsorted(a_ids, area_of)
    week_h = a_week[ai]
    rate_h = week_h / ages._HOURS_PER_WEEK  # burn hours per calendar hour
    rate_starts = a_starts_week[ai] / ages._HOURS_PER_WEEK
    nominal_v = a_nominal[ai]

    base = float(np.nanmin(np.concatenate((t0, [t_at])))) - 86_400.0
    t_min = float(np.nanmin(t0))

    # Burn-hour records: which fixtures carry their own, then the records themselves.
    own_fixtures = np.array(
        session.scalars(
            select(BurnHourRecord.fixture_id)
            .where(BurnHourRecord.fixture_id.in_(fixture_scope))
            .distinct()
        ).all(),
        dtype=np.int64,
    )
    own = np.isin(fix_id, own_fixtures)
    bkey = target_keys(fix_id, area_of, own)
    since = datetime.fromtimestamp(t_min - ages.RATE_WINDOW_DAYS * 86_400.0, tz=at.tzinfo)
    since = min(
        since, datetime.fromtimestamp(t_at - ages.RATE_WINDOW_DAYS * 86_400.0, tz=at.tzinfo)
    )
    rec = float_matrix(
        session,
        select(
            func.coalesce(BurnHourRecord.fixture_id * 2 + 1, BurnHourRecord.area_id * 2),
            _old_epoch(BurnHourRecord.period_start, dialect),
            _old_epoch(BurnHourRecord.period_end, dialect),
            BurnHourRecord.hours,
            BurnHourRecord.starts,
        ).where(
            or_(
                BurnHourRecord.fixture_id.in_(fixture_scope),
                BurnHourRecord.area_id.in_(area_scope),
            ),
            BurnHourRecord.period_end > since,
            BurnHourRecord.period_start < at,
        ),
        5,
    )
    timeline = ages._timeline(rec, base)
    clock = Clock.for_keys(timeline, bkey, rate_h, rate_starts)

    t_end = np.where(np.isnan(dark_at), t_at, np.minimum(dark_at, t_at))
    t_start = np.minimum(t0, t_end)
    h_end, s_end = clock.at(t_end)
    h_start, s_start = clock.at(t_start)
    life_h = np.maximum(h_end - h_start, 0.0)
    life_starts = np.maximum(s_end - s_start, 0.0)
    age_h = h0 + life_h
    starts = s0 + life_starts

    # Hours per start: recorded starts over the lamp's life, else the schedule.
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
    hps = np.where(np.isfinite(meas_hps) & (meas_hps > 0), meas_hps, sched_hps)

    # Burn rate per week: schedule, else measured over the last ages.RATE_WINDOW_DAYS.
    week_rate = np.where(week_h > 0, week_h, ages._measured_rate(timeline, bkey, t_at))

    volts, source, history = reading_voltages(
        session, fixture_scope, area_scope, fix_id, area_of, at, t_start, t_end, clock
    )
    history = ages._with_rest(history, age_h, np.where(np.isnan(fix_v), nominal_v, fix_v))
    volts = np.where(np.isnan(volts) & ~np.isnan(fix_v), fix_v, volts)
    source = np.where((source == "") & ~np.isnan(fix_v), "fixture_measured", source)
    volts = np.where(np.isnan(volts), nominal_v, volts)
    source = np.where(source == "", "site_nominal", source).astype("<U17")

    return ages.PositionAges(
        position_id=pos_id,
        fixture_id=fix_id,
        area_id=area_of,
        site_id=site_of,
        lamp_type_id=type_of,
        ballast_kind=ballast,
        age_h=age_h,
        starts=starts,
        hours_per_start=hps,
        voltage_v=volts,
        voltage_source=source,
        burned_out=~np.isnan(dark_at) & (dark_at <= t_at),
        installed_at_s=t0,
        burn_h_per_week=week_rate,
        at=at,
        history=history,
    )
