"""Impossible ids and page offsets: a 4xx problem naming the field, never a 500, no write.

Found by fuzzing the OpenAPI schema: an id past 2**63 - 1 made SQLite's driver raise
OverflowError (a 500) in every path, query filter, body reference and page offset.
"""

from __future__ import annotations

from typing import Any

import pytest
from fastapi.testclient import TestClient
from sqlalchemy.orm import Session

from service.api.ids import MAX_ID
from tests import factories as fx
from tests.api.test_bad_input_tour import assert_problem, error_fields, table_counts

HUGE = [2**63, 10**30, -(10**30)]
OUT_OF_RANGE = [0, -1, MAX_ID + 1, *HUGE]

PATHS = [
    "/api/v1/sites/{}",
    "/api/v1/areas/{}",
    "/api/v1/fixtures/{}",
    "/api/v1/fixtures/{}/positions",
    "/api/v1/lamp-types/{}",
    "/api/v1/burnout-reports/{}",
    "/api/v1/work-orders/{}",
    "/api/v1/work-orders/{}/lines.csv",
    "/api/v1/runs/{}",
    "/api/v1/forecasts/sites/{}",
    "/api/v1/field-fits/lamp-types/{}",
]


@pytest.mark.parametrize("value", OUT_OF_RANGE)
@pytest.mark.parametrize("path", PATHS)
def test_path_ids_out_of_range(
    client: TestClient, reader: dict[str, str], path: str, value: int
) -> None:
    body = assert_problem(client.get(path.format(value), headers=reader), 422)
    [error] = body["errors"]
    assert error["in"] == "path" and error["field"].endswith("_id"), body


@pytest.mark.parametrize(
    "query",
    [
        "/api/v1/areas?site_id={}",
        "/api/v1/fixtures?lamp_type_id={}",
        "/api/v1/burn-hours?fixture_id={}",
        "/api/v1/lamp-removals?position_id={}",
        "/api/v1/work-orders?area_id={}",
        "/api/v1/position-ages?area_id={}",
        "/api/v1/forecasts/curve?lamp_type_id={}",
    ],
)
@pytest.mark.parametrize("value", [0, *HUGE])
def test_query_ids_out_of_range(
    client: TestClient, reader: dict[str, str], query: str, value: int
) -> None:
    body = assert_problem(client.get(query.format(value), headers=reader), 422)
    name = query.split("?")[1].split("=")[0]
    assert error_fields(body) == {name}


@pytest.mark.parametrize("offset", [-1, MAX_ID + 1, 2**63, 10**30])
def test_page_offset_out_of_range(client: TestClient, reader: dict[str, str], offset: int) -> None:
    for path in ("/api/v1/sites", "/api/v1/voltage-readings", "/api/v1/runs"):
        body = assert_problem(client.get(f"{path}?offset={offset}", headers=reader), 422)
        assert error_fields(body) == {"offset"}


def test_largest_offset_is_an_empty_page(client: TestClient, reader: dict[str, str]) -> None:
    r = client.get(f"/api/v1/sites?offset={MAX_ID}", headers=reader)
    assert r.status_code == 200 and r.json()["items"] == []


@pytest.mark.parametrize(
    ("path", "payload", "field"),
    [
        ("/api/v1/areas", {"name": "A", "site_id": 2**63}, "site_id"),
        (
            "/api/v1/fixtures",
            {"tag": "T-1", "area_id": 10**30, "lamp_type_id": 1},
            "area_id",
        ),
        (
            "/api/v1/burnout-reports",
            {"position_id": 2**70, "reported_at": "2026-01-05T10:00:00+00:00"},
            "position_id",
        ),
        (
            "/api/v1/lamp-removals",
            {
                "position_id": -(2**70),
                "removed_at": "2026-01-05T10:00:00+00:00",
                "failed": True,
                "reason": "burnout",
            },
            "position_id",
        ),
        ("/api/v1/work-orders", {"area_id": 2**64, "kind": "group_relamp"}, "area_id"),
        (
            "/api/v1/voltage-readings",
            {"fixture_id": 2**63, "measured_at": "2026-01-05T10:00:00+00:00", "volts": 230},
            "fixture_id",
        ),
    ],
)
def test_body_ids_out_of_range(
    client: TestClient,
    db: Session,
    writer: dict[str, str],
    path: str,
    payload: dict[str, object],
    field: str,
) -> None:
    before = table_counts(db)
    body = assert_problem(client.post(path, json=payload, headers=writer), 422)
    assert field in error_fields(body)
    assert table_counts(db) == before


@pytest.mark.parametrize("value", [MAX_ID + 1, 2**63, 10**30])
def test_lookup_helper_treats_impossible_ids_as_missing(
    client: TestClient, reader: dict[str, str], value: int
) -> None:
    # Routes whose path ids are plain ints still reach get_or_404: a 404, not a 500.
    assert_problem(client.get(f"/api/v1/areas/{value}/relamp-plan", headers=reader), 404)
    assert_problem(client.get(f"/api/v1/sites/{value}/relamp-plan", headers=reader), 404)


@pytest.mark.parametrize("as_json", [float, str])
def test_body_ids_must_be_json_integers(
    client: TestClient, db: Session, writer: dict[str, str], as_json: Any
) -> None:
    # Found by hand: lax validation read {"fixture_id": true} as fixture 1, and 7.0 or
    # "7" as fixture 7, and stored a reading there.
    _, _, _, fixtures = fx.two_fixture_area(db)
    fid = fixtures[0].id
    row = {"fixture_id": as_json(fid), "measured_at": "2026-01-05T10:00:00+00:00", "volts": 230}
    before = table_counts(db)
    r = client.post("/api/v1/voltage-readings", json=row, headers=writer)
    assert error_fields(assert_problem(r, 422)) == {"fixture_id"}
    assert table_counts(db) == before
    r = client.post("/api/v1/voltage-readings", json={**row, "fixture_id": fid}, headers=writer)
    assert r.status_code == 201, r.text
