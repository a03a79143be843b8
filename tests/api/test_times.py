"""Far dates, impossible dates and DST-gap local times: a 422 naming the field, no write.

Found by hand: 0001-01-01T00:00:00+14:00 or 9999-12-31T23:59:59-12:00 overflowed Python's
datetime when turned into UTC or moved by a day (a 500) in positions, fixtures, readings,
forecasts and the work-order poll; a reading at 02:30 local on a spring-forward night (a
time that never happened) was stored at a made-up instant.
"""

from __future__ import annotations

import pytest
from fastapi.testclient import TestClient
from sqlalchemy.orm import Session

from tests import factories as fx
from tests.api.test_bad_input_tour import assert_problem, error_fields, table_counts

FAR = ["0001-01-01T00:00:00+14:00", "9999-12-31T23:59:59-12:00", "1899-12-31T23:00:00Z"]


@pytest.fixture()
def madrid(db: Session) -> dict[str, int]:
    """A site in Europe/Madrid with one fixture and its first position."""
    s = fx.site(db, time_zone="Europe/Madrid")
    a = fx.area(db, s)
    f = fx.fixtures(db, a, fx.lamp_type(db))[0]
    db.commit()
    return {"site": s.id, "fixture": f.id, "position": f.positions[0].id}


@pytest.mark.parametrize("when", FAR)
def test_far_timestamps_in_bodies(
    client: TestClient, db: Session, writer: dict[str, str], madrid: dict[str, int], when: str
) -> None:
    cases = [
        ("PATCH", f"/api/v1/positions/{madrid['position']}", {"lamp_installed_at": when}),
        ("PATCH", f"/api/v1/fixtures/{madrid['fixture']}", {"installed_on": when[:10]}),
        (
            "POST",
            "/api/v1/voltage-readings",
            {"fixture_id": madrid["fixture"], "measured_at": when, "volts": 230},
        ),
        (
            "POST",
            "/api/v1/burn-hours",
            {"fixture_id": madrid["fixture"], "day": when[:10], "hours": 1},
        ),
        (
            "POST",
            "/api/v1/burnout-reports",
            {"position_id": madrid["position"], "reported_at": when},
        ),
    ]
    before = table_counts(db)
    for method, url, payload in cases:
        r = client.request(method, url, json=payload, headers=writer)
        field = next(k for k in payload if k not in ("fixture_id", "position_id", "volts", "hours"))
        assert error_fields(assert_problem(r, 422)) == {field}, (url, r.text)
    assert table_counts(db) == before


@pytest.mark.parametrize("when", FAR)
def test_far_timestamps_in_queries_and_uploads(
    client: TestClient, db: Session, writer: dict[str, str], madrid: dict[str, int], when: str
) -> None:
    q = when.replace("+", "%2B")
    for url, field in [
        (f"/api/v1/forecasts/sites/{madrid['site']}?at={q}", "at"),
        (f"/api/v1/position-ages?site_id={madrid['site']}&at={q}", "at"),
        (f"/api/v1/work-orders?changed_since={q}", "changed_since"),
    ]:
        assert error_fields(assert_problem(client.get(url, headers=writer), 422)) == {field}
    before = table_counts(db)
    csv = f"fixture_id,measured_at,volts\n{madrid['fixture']},{when},230\n"
    r = client.post(
        "/api/v1/voltage-readings/bulk",
        content=csv.encode(),
        headers={**writer, "content-type": "text/csv"},
    )
    body = assert_problem(r, 422)
    assert [(e["row"], e["field"]) for e in body["errors"]] == [(2, "measured_at")]
    assert table_counts(db) == before


def test_dst_gap_local_time_is_refused(
    client: TestClient, db: Session, writer: dict[str, str], madrid: dict[str, int]
) -> None:
    # Europe/Madrid skipped 02:00-03:00 on 2026-03-29 (IANA tz database).
    gap = {"fixture_id": madrid["fixture"], "measured_at": "2026-03-29T02:30:00", "volts": 230}
    before = table_counts(db)
    body = assert_problem(client.post("/api/v1/voltage-readings", json=gap, headers=writer), 422)
    assert error_fields(body) == {"measured_at"}
    assert "Europe/Madrid" in body["errors"][0]["message"]
    assert table_counts(db) == before
    # The same wall-clock time with an offset, and a local time outside the gap, are fine.
    for when in ("2026-03-29T02:30:00+01:00", "2026-03-29T03:30:00"):
        r = client.post(
            "/api/v1/voltage-readings", json={**gap, "measured_at": when}, headers=writer
        )
        assert r.status_code == 201, r.text


def test_impossible_calendar_dates(
    client: TestClient, writer: dict[str, str], madrid: dict[str, int]
) -> None:
    for payload, field in [
        ({"fixture_id": madrid["fixture"], "day": "2026-02-30", "hours": 1}, "day"),
        ({"fixture_id": madrid["fixture"], "day": "2026-13-01", "hours": 1}, "day"),
    ]:
        r = client.post("/api/v1/burn-hours", json=payload, headers=writer)
        assert error_fields(assert_problem(r, 422)) == {field}
