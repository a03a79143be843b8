"""Rules for burn-hour records; an upload is all rows or none.

Burn-hour rows are either period totals (period_start + period_end, or a calendar `day` in
the site's zone, with hours and optional starts) or cumulative meter readings (read_at,
counter_hours, optional counter_starts, counter_reset). A counter reading becomes the
increment since the previous reading of the same meter; the first reading of a meter is a
baseline (0 hours). A counter lower than the previous one needs counter_reset (the meter
restarted from zero, so the increment is the new value). Each row names a fixture or an
area (an area row applies to every fixture of the area). Refused: negative values, more burn
hours than the period has (24 per calendar day), readings in the future, unknown fixtures or
areas, and periods overlapping a target's stored or uploaded records (409).
"""

from __future__ import annotations

import time
from typing import Any

import numpy as np
from sqlalchemy import func, select
from sqlalchemy.orm import Session

from service.api.bulk import RowErrors
from service.readings import columns as colmod
from service.readings.columns import Columns
from service.readings.models import BurnHourRecord
from service.readings.service import FUTURE_SKEW_S, flag_rows, resolve_targets, scatter_mask
from service.readings.store import bulk_insert

BURN_COLUMNS = (
    "fixture_id",
    "area_id",
    "period_start",
    "period_end",
    "day",
    "hours",
    "starts",
    "read_at",
    "counter_hours",
    "counter_starts",
    "counter_reset",
)
TOL_H = 1e-6  # hours of rounding tolerated in the burn-hours-per-period check


def _last_per_target(
    session: Session, sites: list[int]
) -> tuple[dict[int, float], dict[int, tuple[float, float, float]]]:
    """Per target key: last stored end; last counter (time, counter hours, counter starts)."""
    key = func.coalesce(BurnHourRecord.fixture_id * 2 + 1, BurnHourRecord.area_id * 2)
    last_end: dict[int, float] = {}
    rows_a: list[Any] = list(
        session.execute(
            select(key, func.max(BurnHourRecord.period_end))
            .where(BurnHourRecord.site_id.in_(sites))
            .group_by(key)
        ).all()
    )
    for k, end in rows_a:
        last_end[int(k)] = _as_epoch(end)
    sub = (
        select(key.label("k"), func.max(BurnHourRecord.period_end).label("e"))
        .where(BurnHourRecord.site_id.in_(sites), BurnHourRecord.kind == "counter")
        .group_by(key)
        .subquery()
    )
    last_counter: dict[int, tuple[float, float, float]] = {}
    rows_b: list[Any] = list(
        session.execute(
            select(
                key,
                BurnHourRecord.period_end,
                BurnHourRecord.counter_hours,
                BurnHourRecord.counter_starts,
            )
            .join(sub, (sub.c.k == key) & (sub.c.e == BurnHourRecord.period_end))
            .where(BurnHourRecord.kind == "counter")
        ).all()
    )
    for k, end, ch, cs in rows_b:
        last_counter[int(k)] = (_as_epoch(end), float(ch), np.nan if cs is None else float(cs))
    return last_end, last_counter


def _as_epoch(value: object) -> float:
    from datetime import UTC, datetime

    if isinstance(value, str):  # SQLite aggregates come back as text
        value = datetime.fromisoformat(value)
    assert isinstance(value, datetime)
    if value.tzinfo is None:
        value = value.replace(tzinfo=UTC)
    return value.timestamp()


def ingest_burn_hours(session: Session, c: Columns, *, now: float | None = None) -> int:
    """Validate and store burn-hour rows (all or none); returns how many were stored."""
    now = time.time() if now is None else now
    errors = RowErrors()
    n = len(c)
    fid, aid, site, zones = resolve_targets(session, c, errors)
    hours = colmod.floats(c, "hours", errors)
    starts = colmod.floats(c, "starts", errors)
    p_start = colmod.timestamps(c, "period_start", zones, errors)
    p_end = colmod.timestamps(c, "period_end", zones, errors)
    d_start, d_end = colmod.days(c, "day", zones, errors)
    read_at = colmod.timestamps(c, "read_at", zones, errors)
    ch = colmod.floats(c, "counter_hours", errors)
    cs = colmod.floats(c, "counter_starts", errors)
    reset = colmod.bools(c, "counter_reset", errors)

    counter = ~np.isnan(ch) | ~np.isnan(read_at)
    # A day cell that was given but refused is already an error; no second one for it.
    has_day = ~np.isnan(d_start) | np.array([v not in (None, "") for v in c.get("day")], dtype=bool)
    flag_rows(
        errors,
        c,
        counter & ~np.isnan(hours),
        "hours",
        "a counter reading gives counter_hours, not hours",
    )
    flag_rows(
        errors,
        c,
        counter & (np.isnan(ch)),
        "counter_hours",
        "a counter reading needs counter_hours",
    )
    flag_rows(errors, c, counter & np.isnan(read_at), "read_at", "a counter reading needs read_at")
    flag_rows(errors, c, ~counter & np.isnan(hours), "hours", "is required for a period total")
    flag_rows(
        errors,
        c,
        has_day & (~np.isnan(p_start) | ~np.isnan(p_end)),
        "day",
        "give a day or period_start and period_end, not both",
    )
    period_missing = ~counter & ~has_day & (np.isnan(p_start) | np.isnan(p_end))
    flag_rows(
        errors,
        c,
        period_missing,
        "period_end",
        "a period total needs period_start and period_end, or a day",
    )
    for name, arr in (
        ("hours", hours),
        ("starts", starts),
        ("counter_hours", ch),
        ("counter_starts", cs),
    ):
        flag_rows(errors, c, arr < 0, name, "must not be negative")

    start = np.where(has_day, d_start, p_start)
    end = np.where(has_day, d_end, p_end)
    end = np.where(counter, read_at, end)
    future = end > now + FUTURE_SKEW_S
    flag_rows(errors, c, future & counter, "read_at", "is in the future")
    flag_rows(errors, c, future & ~counter & has_day, "day", "is in the future")
    flag_rows(errors, c, future & ~counter & ~has_day, "period_end", "is in the future")
    flag_rows(errors, c, ~counter & (end <= start), "period_end", "must be after period_start")

    key = np.where(fid > 0, 2 * fid + 1, 2 * aid)
    if errors:
        errors.raise_if_any("burn-hour upload")
    last_end, last_counter = _last_per_target(session, np.unique(site).tolist())

    # Counters: increment since the previous reading of the same meter (upload, then stored).
    inc_h = hours.copy()
    inc_s = starts.copy()
    ci = np.nonzero(counter)[0]
    if ci.size:
        order = ci[np.lexsort((end[ci], key[ci]))]
        k = key[order]
        first = np.ones(order.size, dtype=bool)
        first[1:] = k[1:] != k[:-1]
        prev_t = np.empty(order.size)
        prev_h = np.empty(order.size)
        prev_s = np.empty(order.size)
        prev_t[1:], prev_h[1:], prev_s[1:] = end[order][:-1], ch[order][:-1], cs[order][:-1]
        for j in np.nonzero(first)[0]:
            stored = last_counter.get(int(k[j]))
            prev_t[j], prev_h[j], prev_s[j] = stored if stored else (np.nan, np.nan, np.nan)
        value_h, value_s, rs = ch[order], cs[order], reset[order]
        went_down = ~rs & (value_h < prev_h - TOL_H)
        flag_rows(
            errors,
            c,
            scatter_mask(n, order, went_down),
            "counter_hours",
            "the counter went down since the previous reading; set counter_reset if the meter was reset",
        )
        went_down_s = ~rs & (value_s < prev_s - TOL_H)
        flag_rows(
            errors,
            c,
            scatter_mask(n, order, went_down_s),
            "counter_starts",
            "the starts counter went down; set counter_reset if the meter was reset",
        )
        baseline = np.isnan(prev_t)
        d_h = np.where(rs, value_h, value_h - prev_h)
        d_s = np.where(rs, value_s, value_s - prev_s)
        inc_h[order] = np.where(baseline, 0.0, d_h)
        inc_s[order] = np.where(
            baseline | np.isnan(value_s), np.where(baseline & ~np.isnan(value_s), 0.0, np.nan), d_s
        )
        start[order] = np.where(baseline, end[order], prev_t)

    elapsed_h = (end - start) / 3600.0
    too_many = inc_h > elapsed_h + TOL_H
    flag_rows(
        errors,
        c,
        too_many & ~counter,
        "hours",
        "more burn hours than the period has (at most 24 per calendar day)",
    )
    flag_rows(
        errors,
        c,
        too_many & counter,
        "counter_hours",
        "the counter rose by more burn hours than elapsed since the previous reading",
    )

    # No overlaps within a target: uploaded rows in order, after the stored ones.
    order = np.lexsort((end, key))
    k = key[order]
    same = np.zeros(n, dtype=bool)
    same[1:] = k[1:] == k[:-1]
    prev_end = np.full(n, -np.inf)
    prev_end[1:] = end[order][:-1]
    stored_end = np.array([last_end.get(int(x), -np.inf) for x in k.tolist()])
    in_upload = same & (start[order] < prev_end - 1e-3)
    with_stored = start[order] < stored_end - 1e-3
    flag_rows(
        errors,
        c,
        scatter_mask(n, order, in_upload & ~with_stored),
        "period_start",
        "overlaps another row of the upload for the same fixture or area",
        conflict=True,
    )
    flag_rows(
        errors,
        c,
        scatter_mask(n, order, with_stored),
        "period_start",
        "overlaps burn hours already stored for this fixture or area",
        conflict=True,
    )
    errors.raise_if_any("burn-hour upload")

    return bulk_insert(
        session,
        BurnHourRecord.__table__,  # type: ignore[arg-type]
        (
            "site_id",
            "area_id",
            "fixture_id",
            "kind",
            "period_start",
            "period_end",
            "hours",
            "starts",
            "counter_hours",
            "counter_starts",
            "counter_reset",
        ),
        (
            site,
            aid,
            fid,
            np.where(counter, "counter", "period").tolist(),
            start,
            end,
            inc_h,
            inc_s,
            ch,
            cs,
            reset,
        ),
        ("int", "int", "int", "word", "ts", "ts", "float", "float", "float", "float", "bool"),
    )
