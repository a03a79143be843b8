"""Burn-hour records and voltage readings over the API: ages, sources, bad input, bulk."""

from __future__ import annotations

from datetime import timedelta
from typing import Any

import pytest
from fastapi.testclient import TestClient
from sqlalchemy.orm import Session

from service.readings.ages import position_ages
from tests import factories as fx

T0 = fx.T0


def test_counter_readings_become_increments_and_ages(
    db: Session, client: TestClient, writer: dict[str, str]
) -> None:
    _s, _a, _, fixtures = fx.two_fixture_area(db, hours_per_day=None, days_per_week=None)
    f = fixtures[0]
    for day, value in ((0, 1000.0), (10, 1100.0), (20, 1250.0)):
        r = client.post(
            "/api/v1/burn-hours",
            json={"fixture_id": f.id, "read_at": fx.iso_days(day), "counter_hours": value},
            headers=writer,
        )
        assert r.status_code == 201, r.text
    body = r.json()
    assert body["kind"] == "counter" and body["hours"] == 150.0
    # Reset: the meter restarted from zero, so the increment is the new value.
    r = client.post(
        "/api/v1/burn-hours",
        json={
            "fixture_id": f.id,
            "read_at": fx.iso_days(25),
            "counter_hours": 40,
            "counter_reset": True,
        },
        headers=writer,
    )
    assert r.status_code == 201 and r.json()["hours"] == 40.0
    ages = position_ages(db, fixture_id=f.id, at=T0 + timedelta(days=25))
    # 100 + 150 + 40 recorded hours since the lamps went in at T0; no schedule.
    assert ages.age_h.tolist() == pytest.approx([290.0, 290.0])
    other = position_ages(db, fixture_id=fixtures[1].id, at=T0 + timedelta(days=25))
    assert other.age_h.tolist() == [0.0, 0.0]  # no schedule, no records of its own


def test_area_records_then_schedule_accrues(
    db: Session, client: TestClient, writer: dict[str, str]
) -> None:
    _s, a, _, _fixtures = fx.two_fixture_area(db)  # schedule 12 h x 7 d = 84 h per week
    rows = [
        {"area_id": a.id, "day": (T0 + timedelta(days=d)).date().isoformat(), "hours": 10}
        for d in range(7)
    ]
    r = client.post("/api/v1/burn-hours/bulk", json=rows, headers=writer)
    assert r.status_code == 201 and r.json() == {"stored": 7}
    ages = position_ages(db, area_id=a.id, at=T0 + timedelta(days=14))
    # Lisbon is UTC+0 in January: days run midnight to midnight UTC, so the 7 records
    # cover T0..T0+7d exactly (70 h); the schedule adds 7 days x 12 h after the last one.
    assert ages.age_h.tolist() == pytest.approx([70.0 + 84.0] * 4)
    assert ages.burn_h_per_week[0] == 84.0


def test_voltage_source_precedence(db: Session, client: TestClient, writer: dict[str, str]) -> None:
    s, a, _, fixtures = fx.two_fixture_area(db)
    f0, f1 = fixtures
    at = T0 + timedelta(days=20)
    assert set(position_ages(db, site_id=s.id, at=at).voltage_source) == {"site_nominal"}
    f1.measured_voltage_v = 226.0
    db.commit()
    ages = position_ages(db, site_id=s.id, at=at)
    assert ages.voltage_source.tolist() == ["site_nominal"] * 2 + ["fixture_measured"] * 2
    # Readings on f0: 240 V from T0, 220 V from day 10; burn hours accrue evenly by
    # schedule, so the burn-hour-weighted mean over 20 days is (240 + 220) / 2.
    for day, v in ((0, 240.0), (10, 220.0)):
        r = client.post(
            "/api/v1/voltage-readings",
            json={"fixture_id": f0.id, "measured_at": fx.iso_days(day), "volts": v},
            headers=writer,
        )
        assert r.status_code == 201, r.text
    ages = position_ages(db, fixture_id=f0.id, at=at)
    assert ages.voltage_source.tolist() == ["readings_weighted"] * 2
    assert ages.voltage_v.tolist() == pytest.approx([230.0, 230.0])
    # An area reading taken after the moment asked about does not count; one before the
    # lamps burned any hours is only the latest reading.
    db_area = a.id
    r = client.post(
        "/api/v1/voltage-readings",
        json={"area_id": db_area, "measured_at": fx.iso_days(0), "volts": 236.0},
        headers=writer,
    )
    assert r.status_code == 201
    ages = position_ages(db, fixture_id=f1.id, at=T0)
    assert ages.voltage_source.tolist() == ["latest_reading"] * 2
    assert ages.voltage_v.tolist() == [236.0, 236.0]
    api = client.get(
        "/api/v1/position-ages", params={"fixture_id": f0.id, "at": fx.iso_days(20)}, headers=writer
    )
    assert api.status_code == 200
    assert [p["voltage_source"] for p in api.json()["items"]] == ["readings_weighted"] * 2


@pytest.mark.parametrize(
    ("row", "field"),
    [
        ({"hours": -1.0, "period_start": fx.iso_days(0), "period_end": fx.iso_days(1)}, "hours"),
        ({"hours": 25.0, "period_start": fx.iso_days(0), "period_end": fx.iso_days(1)}, "hours"),
        (
            {
                "hours": 5.0,
                "period_start": "2999-01-01T00:00:00+00:00",
                "period_end": "2999-01-02T00:00:00+00:00",
            },
            "period_end",
        ),
        (
            {"hours": 5.0, "period_start": fx.iso_days(1), "period_end": fx.iso_days(0)},
            "period_end",
        ),
        ({"hours": 5.0, "period_start": "yesterday", "period_end": fx.iso_days(0)}, "period_start"),
    ],
)
def test_bad_burn_hours_store_nothing(
    db: Session, client: TestClient, writer: dict[str, str], row: dict[str, Any], field: str
) -> None:
    _, a, _, _ = fx.two_fixture_area(db)
    r = client.post("/api/v1/burn-hours", json={"area_id": a.id, **row}, headers=writer)
    assert r.status_code == 422, r.text
    assert r.headers["content-type"].startswith("application/problem+json")
    assert field in {e["field"] for e in r.json()["errors"]}
    assert client.get("/api/v1/burn-hours", headers=writer).json()["total"] == 0


def test_counter_down_without_reset_and_unknown_targets(
    db: Session, client: TestClient, writer: dict[str, str]
) -> None:
    _, _, _, fixtures = fx.two_fixture_area(db)
    f = fixtures[0]
    ok = {"fixture_id": f.id, "read_at": fx.iso_days(0), "counter_hours": 500}
    assert client.post("/api/v1/burn-hours", json=ok, headers=writer).status_code == 201
    down = {"fixture_id": f.id, "read_at": fx.iso_days(1), "counter_hours": 400}
    r = client.post("/api/v1/burn-hours", json=down, headers=writer)
    assert r.status_code == 422 and r.json()["errors"][0]["field"] == "counter_hours"
    r = client.post(
        "/api/v1/burn-hours",
        json={"fixture_id": 999_999, "day": "2025-01-02", "hours": 3},
        headers=writer,
    )
    assert r.status_code == 422 and r.json()["errors"][0]["field"] == "fixture_id"
    r = client.post(
        "/api/v1/voltage-readings",
        json={"area_id": 999_999, "measured_at": fx.iso_days(0), "volts": 230},
        headers=writer,
    )
    assert r.status_code == 422
    r = client.post(
        "/api/v1/voltage-readings",
        json={"fixture_id": f.id, "measured_at": fx.iso_days(0), "volts": -5},
        headers=writer,
    )
    assert r.status_code == 422 and r.json()["errors"][0]["field"] == "volts"
    assert client.get("/api/v1/burn-hours", headers=writer).json()["total"] == 1
    assert client.get("/api/v1/voltage-readings", headers=writer).json()["total"] == 0


def test_bulk_csv_is_all_or_nothing(
    db: Session, client: TestClient, writer: dict[str, str], reader: dict[str, str]
) -> None:
    _, a, _, fixtures = fx.two_fixture_area(db)
    f = fixtures[0]
    good = "\n".join(
        ["fixture_id,area_id,day,hours,starts"]
        + [f"{f.id},,2025-01-0{d},{10 + d},2" for d in range(1, 4)]
        + [f",{a.id},2025-01-05,12,1"]
    )
    bad = good + f"\n{f.id},,2025-01-04,30,1\n,{a.id},2025-01-05,5,1"
    headers = {**writer, "content-type": "text/csv"}
    r = client.post("/api/v1/burn-hours/bulk", content=bad, headers=headers)
    assert r.status_code in (409, 422), r.text
    rows = {(e["row"], e["field"]) for e in r.json()["errors"]}
    # Line 6: 30 h in one day; line 7: the area's 2025-01-05 again (overlap).
    assert (6, "hours") in rows and (7, "period_start") in rows
    assert client.get("/api/v1/burn-hours", headers=reader).json()["total"] == 0
    r = client.post("/api/v1/burn-hours/bulk", content=good, headers=headers)
    assert r.status_code == 201 and r.json()["stored"] == 4
    # Overlap with what is stored now: the same upload again is a conflict.
    r = client.post("/api/v1/burn-hours/bulk", content=good, headers=headers)
    assert r.status_code == 409
    assert client.get("/api/v1/burn-hours", headers=reader).json()["total"] == 4
    r = client.post(
        "/api/v1/burn-hours/bulk", content=good, headers={**reader, "content-type": "text/csv"}
    )
    assert r.status_code == 403
    r = client.post(
        "/api/v1/burn-hours/bulk", content=b"x", headers={**writer, "content-type": "image/png"}
    )
    assert r.status_code == 415


def test_future_meter_reading_names_read_at(
    db: Session, client: TestClient, writer: dict[str, str]
) -> None:
    _, _, _, fixtures = fx.two_fixture_area(db)
    rows = [
        {"fixture_id": fixtures[0].id, "read_at": "2999-01-01T00:00:00Z", "counter_hours": 5},
        {"fixture_id": fixtures[1].id, "day": "2999-01-01", "hours": 5},
    ]
    r = client.post("/api/v1/burn-hours/bulk", json=rows, headers=writer)
    assert r.status_code == 422
    assert {(e["row"], e["field"]) for e in r.json()["errors"]} == {(1, "read_at"), (2, "day")}
