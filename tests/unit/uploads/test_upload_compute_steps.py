"""The pure compute steps of the burn-hour upload and the fixture import, with no database.

Expected values are hand arithmetic on the rows given (increments are differences of
meter values; a calendar day has 24 hours).
"""

from __future__ import annotations

from datetime import UTC, datetime

import numpy as np

from service.readings.burn_hours import (
    BURN_COLUMNS,
    BurnCells,
    Stored,
    burn_records,
    period_spans,
)
from service.register.fixture_bulk import FIXTURE_COLUMNS, Names, plan_import, read_fixture_cells
from service.uploads import cells
from service.uploads.errors import RowErrors
from service.uploads.parse import columns_from_dicts

DAY = 86_400.0
T0 = datetime(2025, 1, 1, tzinfo=UTC).timestamp()
NOW = T0 + 100 * DAY


def burn_cells(rows: list[dict[str, object]], errors: RowErrors) -> BurnCells:
    """BurnCells as read_burn_cells builds them, targets given (site 1, zone UTC)."""
    c = columns_from_dicts(rows, BURN_COLUMNS)
    d_start, d_end = cells.days(c, "day", errors)
    return BurnCells(
        numbers=c.numbers,
        fixture_id=cells.ids(c, "fixture_id", errors),
        area_id=cells.ids(c, "area_id", errors),
        site_id=np.ones(len(c), dtype=np.int64),
        hours=cells.floats(c, "hours", errors),
        starts=cells.floats(c, "starts", errors),
        period_start=cells.timestamps(c, "period_start", errors),
        period_end=cells.timestamps(c, "period_end", errors),
        day_start=d_start,
        day_end=d_end,
        given={k: c.given(k) for k in BURN_COLUMNS},
        read_at=cells.timestamps(c, "read_at", errors),
        counter_hours=cells.floats(c, "counter_hours", errors),
        counter_starts=cells.floats(c, "counter_starts", errors),
        counter_reset=cells.bools(c, "counter_reset", errors),
    )


def iso(t: float) -> str:
    """Epoch seconds as ISO 8601 UTC."""
    return datetime.fromtimestamp(t, UTC).isoformat()


def test_counter_increments_follow_the_stored_reading() -> None:
    rows: list[dict[str, object]] = [
        {"fixture_id": 7, "read_at": iso(T0 + 20 * DAY), "counter_hours": 1250},
        {"fixture_id": 7, "read_at": iso(T0 + 10 * DAY), "counter_hours": 1100},
        {
            "fixture_id": 7,
            "read_at": iso(T0 + 25 * DAY),
            "counter_hours": 40,
            "counter_reset": "yes",
        },
        {"fixture_id": 8, "read_at": iso(T0 + 5 * DAY), "counter_hours": 300},  # a baseline
        {"area_id": 3, "day": "2025-01-02", "hours": 10},
    ]
    e = RowErrors()
    b = burn_cells(rows, e)
    spans = period_spans(b, e, now=NOW)
    stored = Stored(last_end={15: T0}, last_counter={15: (T0, 1000.0, np.nan)})  # 2*7+1
    r = burn_records(b, spans, stored, e)
    assert not e, e.items
    # 1000 stored -> 1100 -> 1250, then a reset to 40; fixture 8's first reading is 0 h.
    assert r.hours.tolist() == [150.0, 100.0, 40.0, 0.0, 10.0]
    assert r.start.tolist()[:3] == [T0 + 10 * DAY, T0, T0 + 20 * DAY]
    assert r.start[3] == r.end[3] == T0 + 5 * DAY
    assert r.counter.tolist() == [True] * 4 + [False]


def test_rules_a_row_breaks_and_overlaps() -> None:
    rows: list[dict[str, object]] = [
        {"fixture_id": 1, "day": "2025-01-02", "hours": 25},  # more than a day has
        {"fixture_id": 1, "day": "2025-01-02", "hours": 5},  # the same day again
        {"fixture_id": 2, "day": "2025-01-01", "hours": 5},  # before the stored end
        {"fixture_id": 3, "read_at": iso(T0), "counter_hours": 10, "hours": 2},
        {"fixture_id": 4, "day": "2199-01-01", "hours": 1},
    ]
    e = RowErrors()
    b = burn_cells(rows, e)
    spans = period_spans(b, e, now=NOW)
    burn_records(b, spans, Stored(last_end={5: T0 + 2 * DAY}, last_counter={}), e)
    assert {(i["row"], i["field"], i["message"]) for i in e.items} == {
        (1, "hours", "more burn hours than the period has (at most 24 per calendar day)"),
        (2, "period_start", "overlaps another row of the upload for the same fixture or area"),
        (3, "period_start", "overlaps burn hours already stored for this fixture or area"),
        (4, "hours", "a counter reading gives counter_hours, not hours"),
        (5, "day", "is in the future"),
    }


def fixture_names() -> Names:
    """One site with one area, one lamp type, and one fixture already there (tag OLD)."""
    return Names(
        sites={"Depot": 1},
        areas={(1, "Hall"): 10},
        types={"T8": (5, "linear_fluorescent", "electronic")},
        existing={(1, "OLD"): (99, 2)},
    )


def test_fixture_plan_resolves_names_and_finds_clashes() -> None:
    now = datetime(2025, 6, 1, tzinfo=UTC)
    rows = [
        {"site": "Depot", "area": "Hall", "tag": "A", "lamp_type": "T8", "lamps_per_fixture": "3"},
        {"site": "Depot", "area": "Hall", "tag": "A", "lamp_type": "T8"},
        {"site": "Depot", "area": "Yard", "tag": "B", "lamp_type": "T8"},
        {"site": "Depot", "area": "Hall", "tag": "OLD", "lamp_type": "T8", "lamps_per_fixture": 4},
        {"site": "Depot", "area": "Hall", "tag": "C", "lamp_type": "T8", "ballast_kind": "none"},
        {
            "site": "Depot",
            "area": "Hall",
            "tag": "D",
            "lamp_type": "T8",
            "installed_on": "2030-01-01",
        },
    ]
    c = columns_from_dicts(rows, FIXTURE_COLUMNS)
    e = RowErrors()
    f = read_fixture_cells(c, e, now)
    plan = plan_import(f=f, names=fixture_names(), on_duplicate="update", now=now, errors=e)
    assert {(i["row"], i["field"]) for i in e.items} == {
        (2, "tag"),
        (3, "area"),
        (5, "ballast_kind"),
        (6, "installed_on"),
    }
    assert plan.new == [0] and plan.new_values[0]["lamps_per_fixture"] == 3
    assert plan.new_values[0]["ballast_kind"] == "electronic"  # the lamp type's behaviour
    assert [g["position_no"] for g in plan.grow] == [3, 4]  # OLD grows from 2 to 4 lamps
    assert plan.changed[0]["b_id"] == 99
    e = RowErrors()
    plan_import(f=f, names=fixture_names(), on_duplicate="error", now=now, errors=e)
    assert {
        "row": 4,
        "field": "tag",
        "in": "body",
        "message": "site 'Depot' already has this tag",
    } in e.items
