"""The operating-voltage compute step on arrays (no database): hand-worked weighted means.

Each expected value is worked by hand from the rule in service/readings/operating_voltage.py
(a reading holds until the next one; its weight is the burn hours it held for): with a
constant schedule of r burn hours per calendar hour, a reading holding Δ calendar hours
weighs r·Δ, so the mean is Σ V·r·Δ / Σ r·Δ (arithmetic, common practice for a time-weighted
mean).
"""

from __future__ import annotations

import numpy as np
import pytest

from service.readings.operating_voltage import Positions, Readings, operating_voltages
from service.readings.timeline import Clock, Timeline

H = 3600.0  # seconds per hour
NONE = np.zeros(0)


def _clock(area_ids: list[int], rate_h: float) -> Clock:
    """A schedule-only clock (no meter records): rate_h burn hours per calendar hour."""
    timeline = Timeline.build(NONE.astype(np.int64), NONE, NONE, NONE, NONE, base=-1e6 * H)
    key = 2 * np.asarray(area_ids, dtype=np.int64)
    n = key.size
    return Clock.for_keys(timeline, key, np.full(n, rate_h), np.zeros(n))


def _positions(fix: list[int], area: list[int], start_h: float, end_h: float) -> Positions:
    n = len(fix)
    return Positions(
        fix_id=np.asarray(fix, dtype=np.int64),
        area_of=np.asarray(area, dtype=np.int64),
        t_start=np.full(n, start_h * H),
        t_end=np.full(n, end_h * H),
        clock=_clock(area, 0.5),
    )


def _readings(rows: list[tuple[int | None, int, float, float]]) -> Readings:
    """Rows of (fixture id or None, area id, hour measured, volts)."""
    key = [2 * f + 1 if f is not None else 2 * a for f, a, _, _ in rows]
    return Readings(
        key=np.asarray(key, dtype=np.int64),
        t=np.asarray([h * H for _, _, h, _ in rows]),
        volts=np.asarray([v for _, _, _, v in rows]),
        fixture=np.asarray([-1 if f is None else f for f, _, _, _ in rows], dtype=np.int64),
    )


def test_area_readings_weighted_by_the_burn_hours_they_held() -> None:
    # 220 V from before the install (counts from hour 0) to hour 40, then 240 V to hour 100:
    # 20 and 30 burn hours at 0.5 h per hour, so (220·20 + 240·30) / 50 = 232 V.
    readings = _readings([(None, 7, -10.0, 220.0), (None, 7, 40.0, 240.0)])
    volts, source, history = operating_voltages(
        readings=readings, positions=_positions([3], [7], 0.0, 100.0)
    )
    assert volts[0] == pytest.approx(232.0) and source[0] == "readings_weighted"
    assert history.position.tolist() == [0, 0]
    assert history.hours.tolist() == pytest.approx([20.0, 30.0])
    assert history.voltage.tolist() == [220.0, 240.0]


def test_a_fixtures_own_readings_win_over_its_areas() -> None:
    readings = _readings([(None, 7, 1.0, 220.0), (3, 7, 2.0, 250.0)])
    volts, source, _ = operating_voltages(
        readings=readings, positions=_positions([3, 4], [7, 7], 0.0, 10.0)
    )
    # Fixture 3 has one reading of its own (held hours 2 to 10); fixture 4 only the area's.
    assert volts.tolist() == pytest.approx([250.0, 220.0])
    assert source.tolist() == ["readings_weighted", "readings_weighted"]


def test_no_burn_hours_under_any_reading_falls_back_to_the_latest() -> None:
    # Both readings come after the lamp came out (hour 10): no weight, the latest one stands.
    readings = _readings([(None, 7, 20.0, 225.0), (None, 7, 30.0, 235.0)])
    volts, source, history = operating_voltages(
        readings=readings, positions=_positions([3], [7], 0.0, 10.0)
    )
    assert volts[0] == 235.0 and source[0] == "latest_reading"
    assert history.position.size == 0


def test_positions_without_readings_get_nan_and_no_source() -> None:
    readings = _readings([(None, 7, 1.0, 220.0)])
    volts, source, _ = operating_voltages(
        readings=readings, positions=_positions([3], [8], 0.0, 10.0)
    )
    assert np.isnan(volts[0]) and source[0] == ""
    empty = _readings([])
    volts, source, _ = operating_voltages(readings=empty, positions=_positions([3], [7], 0.0, 10.0))
    assert np.isnan(volts[0]) and source[0] == ""


def test_segments_carry_the_starts_their_interval_counted() -> None:
    # Hand-worked from the rule (a segment's starts are the clock's starts over the span the
    # reading held): metered records 0-40 h with 10 starts and 40-100 h with 60 starts
    # (20 and 30 burn hours at 0.5 h/h); readings at hour 0 and hour 40 split the life
    # there, so the segments hold 20 h / 10 starts and 30 h / 60 starts.
    key = np.array([14, 14], dtype=np.int64)  # area 7's records
    tl = Timeline.build(
        key,
        np.array([0.0, 40.0]) * H,
        np.array([40.0, 100.0]) * H,
        np.array([20.0, 30.0]),
        np.array([10.0, 60.0]),
        base=-10.0 * H,
    )
    clock = Clock.for_keys(tl, np.array([14]), np.zeros(1), np.zeros(1))
    pos = Positions(
        fix_id=np.array([3]),
        area_of=np.array([7]),
        t_start=np.zeros(1),
        t_end=np.full(1, 100.0 * H),
        clock=clock,
    )
    readings = _readings([(None, 7, 0.0, 220.0), (None, 7, 40.0, 240.0)])
    _, _, history = operating_voltages(readings=readings, positions=pos)
    assert history.hours.tolist() == pytest.approx([20.0, 30.0])
    assert history.starts.tolist() == pytest.approx([10.0, 60.0])
    assert history.segment_hours_per_start().tolist() == pytest.approx([2.0, 0.5])


def test_segments_without_starts_on_the_clock_are_unknown() -> None:
    # A schedule clock with no starts: the segment's starts are NaN (the lamp's mean applies).
    readings = _readings([(None, 7, -10.0, 220.0)])
    _, _, history = operating_voltages(readings=readings, positions=_positions([3], [7], 0, 10))
    assert np.isnan(history.starts).all()
