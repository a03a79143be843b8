"""Voltage and burn-hour uploads at the edges: empty bulk bodies, near-zero volts, NaN.

Found by fuzzing: POST /voltage-readings/bulk with an empty JSON list answered 500 (a
float mask met a bool mask), and a reading of 5e-324 V was stored and then broke the
forecasts of its fixtures.
"""

from __future__ import annotations

import pytest
from fastapi.testclient import TestClient
from sqlalchemy.orm import Session

from tests import factories as fx
from tests.api.test_bad_input_tour import assert_problem, error_fields, table_counts


@pytest.mark.parametrize("path", ["/api/v1/voltage-readings/bulk", "/api/v1/burn-hours/bulk"])
def test_empty_bulk_stores_nothing(
    client: TestClient, db: Session, writer: dict[str, str], path: str
) -> None:
    before = table_counts(db)
    r = client.post(path, json=[], headers=writer)
    assert r.status_code in (200, 201) and r.json() == {"stored": 0}, r.text
    assert table_counts(db) == before


@pytest.mark.parametrize("volts", [5e-324, 0.5, 1000.5])
def test_volts_out_of_range(
    client: TestClient, db: Session, writer: dict[str, str], volts: float
) -> None:
    _, _, _, fixtures = fx.two_fixture_area(db)
    row = {"fixture_id": fixtures[0].id, "measured_at": fx.iso_days(1), "volts": volts}
    before = table_counts(db)
    one = client.post("/api/v1/voltage-readings", json=row, headers=writer)
    assert error_fields(assert_problem(one, 422)) == {"volts"}
    good = {**row, "volts": 231.0}
    bulk = client.post("/api/v1/voltage-readings/bulk", json=[good, row], headers=writer)
    body = assert_problem(bulk, 422)
    assert [(e["row"], e["field"]) for e in body["errors"]] == [(2, "volts")]
    assert table_counts(db) == before


@pytest.mark.parametrize("literal", ["NaN", "Infinity", "1e400"])
def test_non_finite_hours(
    client: TestClient, db: Session, writer: dict[str, str], literal: str
) -> None:
    _, _, _, fixtures = fx.two_fixture_area(db)
    raw = f'{{"fixture_id": {fixtures[0].id}, "day": "2025-01-02", "hours": {literal}}}'
    before = table_counts(db)
    r = client.post(
        "/api/v1/burn-hours",
        content=raw.encode(),
        headers={**writer, "content-type": "application/json"},
    )
    assert error_fields(assert_problem(r, 422)) == {"hours"}
    assert table_counts(db) == before


@pytest.mark.parametrize(
    ("path", "raw"),
    [
        # a bare carriage return in a cell, then in the header
        ("/api/v1/voltage-readings/bulk", b"fixture_id,measured_at,volts\n1,2026-01-01,23\r0\n"),
        ("/api/v1/burn-hours/bulk", b"fixture_id,day,hours\n1,2026-01-01,2\r3\n"),
        ("/api/v1/voltage-readings/bulk", b"fixture_id\rarea_id,volts\n"),
        ("/api/v1/burn-hours/bulk", b"fixture_id\rarea_id,hours\n"),
    ],
)
def test_unreadable_csv_is_a_422(
    client: TestClient, db: Session, writer: dict[str, str], path: str, raw: bytes
) -> None:
    # Found by fuzzing: csv.Error escaped the readings CSV reader as a 500.
    before = table_counts(db)
    r = client.post(path, content=raw, headers={**writer, "content-type": "text/csv"})
    assert "cannot be read" in assert_problem(r, 422)["detail"]
    assert table_counts(db) == before
