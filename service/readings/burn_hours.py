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

ingest_burn_hours runs load (read_burn_cells, load_stored) -> compute (period_spans,
burn_records: pure numpy, no database) -> write (write_burn_records).
"""

from __future__ import annotations

import time
from dataclasses import dataclass
from datetime import UTC, datetime
from typing import Any

import numpy as np
from numpy.typing import NDArray
from sqlalchemy import func, select
from sqlalchemy.orm import Session

from service.readings.models import BurnHourRecord
from service.readings.targets import FUTURE_SKEW_S, resolve_targets, scatter_mask
from service.uploads import cells
from service.uploads.errors import RowErrors
from service.uploads.parse import Columns, UploadSpec
from service.uploads.write import Epoch, write_rows

FloatArray = NDArray[np.float64]
IntArray = NDArray[np.int64]
BoolArray = NDArray[np.bool_]

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
BURN_UPLOAD = UploadSpec(columns=BURN_COLUMNS)
TOL_H = 1e-6  # hours of rounding tolerated in the burn-hours-per-period check
WHAT = "burn-hour upload"
# Columns whose presence decides a row's kind and which rule it breaks (not their values).
_GIVEN = ("day", "hours", "period_start", "period_end", "read_at", "counter_hours")


@dataclass(frozen=True, kw_only=True)
class BurnCells:
    """Uploaded burn-hour rows, typed: epoch seconds and hours, NaN (ids -1) where blank."""

    numbers: IntArray  # each row's number in the file
    fixture_id: IntArray
    area_id: IntArray
    site_id: IntArray
    hours: FloatArray
    starts: FloatArray
    period_start: FloatArray
    period_end: FloatArray
    day_start: FloatArray
    day_end: FloatArray
    given: dict[str, BoolArray]  # per column: a cell was given (even one that was refused)
    read_at: FloatArray
    counter_hours: FloatArray
    counter_starts: FloatArray
    counter_reset: BoolArray


@dataclass(frozen=True, kw_only=True)
class Spans:
    """Each row's period as uploaded: counter rows end at read_at; key: its target."""

    counter: BoolArray
    start: FloatArray
    end: FloatArray
    key: IntArray  # 2 * fixture id + 1, or 2 * area id


@dataclass(frozen=True, kw_only=True)
class Stored:
    """Per target key: the last stored end; the last counter (time, hours, starts)."""

    last_end: dict[int, float]
    last_counter: dict[int, tuple[float, float, float]]


@dataclass(frozen=True, kw_only=True)
class BurnRecords:
    """The records to store, one per uploaded row (counter rows as increments)."""

    cells: BurnCells
    counter: BoolArray
    start: FloatArray
    end: FloatArray
    hours: FloatArray
    starts: FloatArray


def read_burn_cells(session: Session, c: Columns, errors: RowErrors) -> BurnCells:
    """Load: the rows' targets (one query per table, rows locked) and their typed cells."""
    # The overlap check reads what is stored for each target: lock the targets first.
    fid, aid, site, zones = resolve_targets(session, c, errors, lock=True)
    d_start, d_end = cells.days(c, "day", errors, zones)
    return BurnCells(
        numbers=c.numbers,
        fixture_id=fid,
        area_id=aid,
        site_id=site,
        hours=cells.floats(c, "hours", errors),
        starts=cells.floats(c, "starts", errors),
        period_start=cells.timestamps(c, "period_start", errors, zones),
        period_end=cells.timestamps(c, "period_end", errors, zones),
        day_start=d_start,
        day_end=d_end,
        given={k: c.given(k) for k in _GIVEN},
        read_at=cells.timestamps(c, "read_at", errors, zones),
        counter_hours=cells.floats(c, "counter_hours", errors),
        counter_starts=cells.floats(c, "counter_starts", errors),
        counter_reset=cells.bools(c, "counter_reset", errors),
    )


def period_spans(b: BurnCells, errors: RowErrors, *, now: float) -> Spans:
    """Compute: each row's kind and period, with the rules a row breaks on its own."""
    flag = errors.add_mask
    n, hours, ch, read_at, given = b.numbers, b.hours, b.counter_hours, b.read_at, b.given
    counter = given["counter_hours"] | given["read_at"]
    has_day = given["day"]
    has_period = given["period_start"] | given["period_end"]
    flag(n, counter & given["hours"], "hours", "a counter reading gives counter_hours, not hours")
    flag(
        n,
        counter & ~given["counter_hours"],
        "counter_hours",
        "a counter reading needs counter_hours",
    )
    flag(n, counter & ~given["read_at"], "read_at", "a counter reading needs read_at")
    flag(n, ~counter & ~given["hours"], "hours", "is required for a period total")
    flag(n, has_day & has_period, "day", "give a day or period_start and period_end, not both")
    flag(
        n,
        ~counter & ~has_day & ~(given["period_start"] & given["period_end"]),
        "period_end",
        "a period total needs period_start and period_end, or a day",
    )
    for name, arr in (
        ("hours", hours),
        ("starts", b.starts),
        ("counter_hours", ch),
        ("counter_starts", b.counter_starts),
    ):
        flag(n, arr < 0, name, "must not be negative")
    start = np.where(has_day, b.day_start, b.period_start)
    end = np.where(counter, read_at, np.where(has_day, b.day_end, b.period_end))
    future = end > now + FUTURE_SKEW_S
    flag(n, future & counter, "read_at", "is in the future")
    flag(n, future & ~counter & has_day, "day", "is in the future")
    flag(n, future & ~counter & ~has_day, "period_end", "is in the future")
    flag(n, ~counter & (end <= start), "period_end", "must be after period_start")
    key = np.where(b.fixture_id > 0, 2 * b.fixture_id + 1, 2 * b.area_id)
    return Spans(counter=counter, start=start, end=end, key=key)


def _counter_increments(
    b: BurnCells, s: Spans, stored: Stored, errors: RowErrors
) -> tuple[FloatArray, FloatArray, FloatArray]:
    """Counter rows as increments since the previous reading of the same meter.

    Returns (start, hours, starts) for every row: period rows unchanged.
    """
    start, inc_h, inc_s = s.start.copy(), b.hours.copy(), b.starts.copy()
    ci = np.nonzero(s.counter)[0]
    if not ci.size:
        return start, inc_h, inc_s
    n = b.numbers.size
    ch, cs = b.counter_hours, b.counter_starts
    order = ci[np.lexsort((s.end[ci], s.key[ci]))]
    k = s.key[order]
    first = np.ones(order.size, dtype=bool)
    first[1:] = k[1:] != k[:-1]
    prev_t, prev_h, prev_s = (np.empty(order.size) for _ in range(3))
    prev_t[1:], prev_h[1:], prev_s[1:] = s.end[order][:-1], ch[order][:-1], cs[order][:-1]
    for j in np.nonzero(first)[0]:  # the previous reading of a meter's first row is stored
        prev_t[j], prev_h[j], prev_s[j] = stored.last_counter.get(int(k[j]), (np.nan,) * 3)
    value_h, value_s, rs = ch[order], cs[order], b.counter_reset[order]
    errors.add_mask(
        b.numbers,
        scatter_mask(n, order, ~rs & (value_h < prev_h - TOL_H)),
        "counter_hours",
        "the counter went down since the previous reading; set counter_reset if the meter was reset",
    )
    errors.add_mask(
        b.numbers,
        scatter_mask(n, order, ~rs & (value_s < prev_s - TOL_H)),
        "counter_starts",
        "the starts counter went down; set counter_reset if the meter was reset",
    )
    baseline = np.isnan(prev_t)
    inc_h[order] = np.where(baseline, 0.0, np.where(rs, value_h, value_h - prev_h))
    d_s = np.where(rs, value_s, value_s - prev_s)
    inc_s[order] = np.where(
        baseline | np.isnan(value_s), np.where(baseline & ~np.isnan(value_s), 0.0, np.nan), d_s
    )
    start[order] = np.where(baseline, s.end[order], prev_t)
    return start, inc_h, inc_s


def _check_overlaps(
    b: BurnCells, s: Spans, start: FloatArray, stored: Stored, errors: RowErrors
) -> None:
    """No overlaps within a target: uploaded rows in order, after the stored ones (409)."""
    n = b.numbers.size
    order = np.lexsort((s.end, s.key))
    k = s.key[order]
    same = np.zeros(n, dtype=bool)
    same[1:] = k[1:] == k[:-1]
    prev_end = np.full(n, -np.inf)
    prev_end[1:] = s.end[order][:-1]
    stored_end = np.array([stored.last_end.get(int(x), -np.inf) for x in k.tolist()])
    in_upload = same & (start[order] < prev_end - 1e-3)
    with_stored = start[order] < stored_end - 1e-3
    errors.add_mask(
        b.numbers,
        scatter_mask(n, order, in_upload & ~with_stored),
        "period_start",
        "overlaps another row of the upload for the same fixture or area",
        conflict=True,
    )
    errors.add_mask(
        b.numbers,
        scatter_mask(n, order, with_stored),
        "period_start",
        "overlaps burn hours already stored for this fixture or area",
        conflict=True,
    )


def burn_records(b: BurnCells, s: Spans, stored: Stored, errors: RowErrors) -> BurnRecords:
    """Compute: increments, the hours-per-period rule and overlaps, given what is stored."""
    start, inc_h, inc_s = _counter_increments(b, s, stored, errors)
    too_many = inc_h > (s.end - start) / 3600.0 + TOL_H
    errors.add_mask(
        b.numbers,
        too_many & ~s.counter,
        "hours",
        "more burn hours than the period has (at most 24 per calendar day)",
    )
    errors.add_mask(
        b.numbers,
        too_many & s.counter,
        "counter_hours",
        "the counter rose by more burn hours than elapsed since the previous reading",
    )
    _check_overlaps(b, s, start, stored, errors)
    return BurnRecords(
        cells=b, counter=s.counter, start=start, end=s.end, hours=inc_h, starts=inc_s
    )


def load_stored(session: Session, sites: list[int]) -> Stored:
    """Load: per target, the last stored end and the last counter reading."""
    key = func.coalesce(BurnHourRecord.fixture_id * 2 + 1, BurnHourRecord.area_id * 2)
    rows_a: list[Any] = list(
        session.execute(
            select(key, func.max(BurnHourRecord.period_end))
            .where(BurnHourRecord.site_id.in_(sites))
            .group_by(key)
        ).all()
    )
    last_end = {int(k): _as_epoch(end) for k, end in rows_a}
    sub = (
        select(key.label("k"), func.max(BurnHourRecord.period_end).label("e"))
        .where(BurnHourRecord.site_id.in_(sites), BurnHourRecord.kind == "counter")
        .group_by(key)
        .subquery()
    )
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
    last_counter = {
        int(k): (_as_epoch(end), float(ch), np.nan if cs is None else float(cs))
        for k, end, ch, cs in rows_b
    }
    return Stored(last_end=last_end, last_counter=last_counter)


def _as_epoch(value: object) -> float:
    if isinstance(value, str):  # SQLite aggregates come back as text
        value = datetime.fromisoformat(value)
    assert isinstance(value, datetime)
    if value.tzinfo is None:
        value = value.replace(tzinfo=UTC)
    return value.timestamp()


def write_burn_records(session: Session, r: BurnRecords) -> int:
    """Write: the records through the bulk writer; returns how many were stored."""
    b = r.cells
    write_rows(
        session,
        BurnHourRecord.__table__,  # type: ignore[arg-type]
        {
            "site_id": b.site_id,
            "area_id": b.area_id,
            "fixture_id": b.fixture_id,
            "kind": np.where(r.counter, "counter", "period"),
            "period_start": Epoch(r.start),
            "period_end": Epoch(r.end),
            "hours": r.hours,
            "starts": r.starts,
            "counter_hours": b.counter_hours,
            "counter_starts": b.counter_starts,
            "counter_reset": b.counter_reset,
        },
    )
    return int(b.numbers.size)


def ingest_burn_hours(session: Session, c: Columns, *, now: float | None = None) -> int:
    """Validate and store burn-hour rows (all or none); returns how many were stored."""
    errors = RowErrors()
    b = read_burn_cells(session, c, errors)
    spans = period_spans(b, errors, now=time.time() if now is None else now)
    errors.raise_if_any(WHAT)
    stored = load_stored(session, np.unique(b.site_id).tolist())
    records = burn_records(b, spans, stored, errors)
    errors.raise_if_any(WHAT)
    return write_burn_records(session, records)
