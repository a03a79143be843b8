"""Operating voltage of each lamp position from voltage readings, for many at once.

The burn-hour-weighted mean of the readings over the lamp's life: each reading holds until
the next one, the last one before the lamp went in counts from the install, and the weight
of a reading is the burn hours (service.readings.timeline.Clock) it held for; this is
"readings_weighted". Without burn hours under any reading, the latest reading,
"latest_reading". A fixture's own readings win over its area's. Volts throughout.

The same (reading, burn hours) pairs are returned as an exposure history (one segment per
reading that held for some of the lamp's burn hours): the numeric core accumulates wear
over them (service.reliability.exposure) instead of using the mean voltage. Each segment
carries the starts its clock counted over the same span (records, else the schedule; NaN
where the clock has none), so its switching factor is that interval's, not the lamp's mean.
The fallbacks after these (fixture measured volts, site nominal) are in ages.py.
"""

from __future__ import annotations

from dataclasses import dataclass
from datetime import datetime
from typing import Any

import numpy as np
from numpy.typing import NDArray
from sqlalchemy import func, or_, select
from sqlalchemy.orm import Session

from service.readings.models import VoltageReading
from service.readings.repository import epoch, float_matrix, target_keys
from service.readings.timeline import Clock
from service.reliability.exposure import ExposureHistory

FloatArray = NDArray[np.float64]
IntArray = NDArray[np.int64]


@dataclass(frozen=True, kw_only=True)
class Readings:
    """Voltage readings as arrays, one row a reading (any order)."""

    key: IntArray  # target key: 2 * fixture id + 1 for a fixture's own, 2 * area id
    t: FloatArray  # measured at, epoch seconds
    volts: FloatArray
    fixture: IntArray  # the reading's fixture id, -1 for an area's reading


@dataclass(frozen=True, kw_only=True)
class Positions:
    """The lamp positions asked about: their fixture, area, lamp life span and clock."""

    fix_id: IntArray
    area_of: IntArray
    t_start: FloatArray  # the lamp went in, epoch seconds
    t_end: FloatArray  # now (or the removal), epoch seconds
    clock: Clock  # burn hours per position row


def load_readings(
    session: Session, fixture_scope: Any, area_ids: list[int], at: datetime
) -> Readings:
    """Every reading up to `at` of the fixtures and areas in scope (one query).

    fixture_scope: a select of fixture ids (may be a superset, whose extra fixtures are never
    looked up) or None for every fixture; area_ids: the areas' ids.
    """
    dialect = session.connection().dialect.name
    m = float_matrix(
        session,
        select(
            func.coalesce(VoltageReading.fixture_id * 2 + 1, VoltageReading.area_id * 2),
            epoch(VoltageReading.measured_at, dialect),
            VoltageReading.volts,
            func.coalesce(VoltageReading.fixture_id, -1),
        ).where(
            or_(
                VoltageReading.area_id.in_(area_ids),
                VoltageReading.fixture_id.is_not(None)
                if fixture_scope is None
                else VoltageReading.fixture_id.in_(fixture_scope),
            ),
            VoltageReading.measured_at <= at,
        ),
        4,
    )
    return Readings(
        key=m[:, 0].astype(np.int64), t=m[:, 1], volts=m[:, 2], fixture=m[:, 3].astype(np.int64)
    )


def reading_voltages(
    session: Session,
    fixture_scope: Any,
    area_ids: list[int],
    fix_id: IntArray,
    area_of: IntArray,
    at: datetime,
    t_start: FloatArray,
    t_end: FloatArray,
    clock: Clock,
) -> tuple[FloatArray, NDArray[np.str_], ExposureHistory]:
    """Weighted-mean or latest reading per position (NaN and "" where there is none).

    Also the readings' burn-hour segments per position (rows of fix_id), for exposure.
    """
    readings = load_readings(session, fixture_scope, area_ids, at)
    positions = Positions(fix_id=fix_id, area_of=area_of, t_start=t_start, t_end=t_end, clock=clock)
    return operating_voltages(readings=readings, positions=positions)


def operating_voltages(
    *, readings: Readings, positions: Positions
) -> tuple[FloatArray, NDArray[np.str_], ExposureHistory]:
    """Pure: the burn-hour-weighted mean reading per position, else its latest reading."""
    p = positions
    n = p.fix_id.size
    volts = np.full(n, np.nan)
    source = np.full(n, "", dtype="<U17")
    history = ExposureHistory.empty()
    if readings.key.size == 0:
        return volts, source, history
    order = np.lexsort((readings.t, readings.key))
    rkey, rt, rv = readings.key[order], readings.t[order], readings.volts[order]
    keys, lo, counts = np.unique(rkey, return_index=True, return_counts=True)
    own = np.isin(p.fix_id, readings.fixture[readings.fixture >= 0])
    vkey = target_keys(p.fix_id, p.area_of, own)
    r = np.minimum(np.searchsorted(keys, vkey), keys.size - 1)
    has = keys[r] == vkey
    # Latest reading per position (fallback).
    latest = np.where(has, rv[lo[r] + counts[r] - 1], np.nan)
    # One (position, reading) pair per reading of the position's voltage target, computed
    # once per group of positions sharing target, clock and lamp life (then copied back).
    cand = np.nonzero(has)[0]
    sig = np.column_stack(
        (vkey[cand], p.clock.key[cand], p.clock.rate_h[cand], p.t_start[cand], p.t_end[cand])
    )
    first_of, inverse = _row_groups(sig)
    pos = cand[first_of]
    if pos.size:
        cnt = counts[r[pos]]
        pair_pos = np.repeat(pos, cnt)
        j = np.repeat(lo[r[pos]], cnt) + (
            np.arange(cnt.sum()) - np.repeat(np.cumsum(cnt) - cnt, cnt)
        )
        last_of_key = np.repeat(lo[r[pos]] + cnt - 1, cnt)
        w, w_starts = _held_hours(p, rt, j, pair_pos, last_of_key)
        wsum = np.bincount(pair_pos, weights=w, minlength=n)
        vsum = np.bincount(pair_pos, weights=w * rv[j], minlength=n)
        rep = pos[np.ravel(inverse)]  # each candidate's group representative
        weighted = wsum[rep] > 0
        with np.errstate(divide="ignore", invalid="ignore"):
            volts[cand] = np.where(weighted, vsum[rep] / wsum[rep], np.nan)
        source[cand] = np.where(weighted, "readings_weighted", "")
        history = _segments(cand, cnt, np.ravel(inverse), w, rv[j], w_starts)
    fallback = has & np.isnan(volts)
    volts = np.where(fallback, latest, volts)
    source = np.where(fallback, "latest_reading", source).astype("<U17")
    return volts, source, history


def _row_groups(sig: NDArray[Any]) -> tuple[IntArray, IntArray]:
    """np.unique(sig, axis=0, return_index=True, return_inverse=True) without the uniques.

    The same groups in the same order (rows sorted lexicographically by value, first
    occurrence kept; NaN equals nothing), by one lexsort instead of the sort of a
    structured view, about 5x quicker at 100,000 rows.
    """
    if sig.shape[0] == 0:
        return np.zeros(0, dtype=np.int64), np.zeros(0, dtype=np.int64)
    order = np.lexsort(sig.T[::-1])
    s = sig[order]
    new = np.ones(s.shape[0], dtype=bool)
    new[1:] = np.any(s[1:] != s[:-1], axis=1)
    inverse = np.empty(s.shape[0], dtype=np.int64)
    inverse[order] = np.cumsum(new) - 1
    return order[new].astype(np.int64), inverse


def _held_hours(
    p: Positions, rt: FloatArray, j: IntArray, pair_pos: IntArray, last_of_key: IntArray
) -> tuple[FloatArray, FloatArray]:
    """Burn hours and starts each (position, reading) pair held: reading or install to next or end."""
    a = np.maximum(rt[j], p.t_start[pair_pos])
    nxt = np.where(j < last_of_key, rt[np.minimum(j + 1, rt.size - 1)], np.inf)
    b = np.minimum(nxt, p.t_end[pair_pos])
    live = b > a
    w = np.zeros(j.size)
    starts = np.zeros(j.size)
    if live.any():
        rows_live = pair_pos[live]
        hb, sb = p.clock.at(b[live], rows_live)
        ha, sa = p.clock.at(a[live], rows_live)
        w[live] = np.maximum(hb - ha, 0.0)
        starts[live] = np.maximum(sb - sa, 0.0)
    # No starts on the clock (neither records nor schedule give any): unknown, not zero.
    return w, np.where(starts > 0, starts, np.nan)


def _segments(
    cand: IntArray,
    cnt: IntArray,
    inv: IntArray,
    w: FloatArray,
    volts: FloatArray,
    starts: FloatArray,
) -> ExposureHistory:
    """Every candidate's segments: its group's pairs (contiguous per group, in group order)."""
    g_start = np.cumsum(cnt) - cnt
    c_cnt = cnt[inv]
    seg = np.repeat(g_start[inv], c_cnt) + (
        np.arange(c_cnt.sum()) - np.repeat(np.cumsum(c_cnt) - c_cnt, c_cnt)
    )
    seg_row = np.repeat(cand, c_cnt)
    live = w[seg] > 0
    return ExposureHistory(seg_row[live], w[seg][live], volts[seg][live], starts[seg][live])
