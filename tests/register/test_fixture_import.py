"""Fixture bulk import and export: CSV and JSON, all rows or none, round trip."""

from __future__ import annotations

import json
from datetime import UTC, datetime
from typing import Any

from fastapi.testclient import TestClient
from sqlalchemy import text
from sqlalchemy.orm import Session

from tests.factories import api_fixture, api_world

HEADER = (
    "site,area,tag,location,lamp_type,lamps_per_fixture,ballast_kind,measured_voltage_v,"
    "installed_on,lamps_installed_at,lamp_hours_at_install,lamp_starts_at_install"
)
SITE = "Harbourside Depot"


def csv_of(*lines: str) -> str:
    """A CSV upload with the standard header."""
    return "\n".join([HEADER, *lines]) + "\n"


GOOD = [
    f"{SITE},Main Hall,H-001,Bay 1,T8-58,2,,231.5,2023-02-01,,100,",
    f"{SITE},Main Hall,H-002,Bay 2,T8-58,4,electronic,,,2024-01-05T10:00:00+02:00,,",
    f"{SITE},Yard,Y-001,,LED-20,1,,,,,,",
]


def post(
    client: TestClient, headers: dict[str, str], body: str, kind: str = "text/csv", q: str = ""
) -> Any:
    """POST an upload to the fixture import."""
    return client.post(
        f"/api/v1/fixtures/import{q}",
        content=body.encode(),
        headers={**headers, "Content-Type": kind},
    )


def count(client: TestClient, headers: dict[str, str]) -> tuple[int, int]:
    """(fixtures, lamp positions) stored."""
    items = client.get("/api/v1/fixtures?limit=1000", headers=headers).json()["items"]
    return len(items), sum(len(f["positions"]) for f in items)


def test_csv_import_creates_fixtures_and_positions(
    client: TestClient, writer: dict[str, str]
) -> None:
    w = api_world(client, writer)
    r = post(client, writer, csv_of(*GOOD))
    assert r.status_code == 200, r.text
    assert r.json() == {"rows": 3, "created": 3, "updated": 0, "positions_created": 7}
    assert count(client, writer) == (3, 7)
    items = client.get("/api/v1/fixtures?sort=tag", headers=writer).json()["items"]
    h1, h2, y1 = items
    assert h1["area_id"] == w["hall"]["id"] and h1["lamp_type_id"] == w["t8"]["id"]
    assert h1["ballast_kind"] == "electronic" and h1["measured_voltage_v"] == 231.5
    at = datetime.fromisoformat(h1["positions"][0]["lamp_installed_at"])
    assert at == datetime(2023, 2, 1, tzinfo=UTC) and h1["positions"][0]["hours_at_install"] == 100
    at = datetime.fromisoformat(h2["positions"][3]["lamp_installed_at"])
    assert at == datetime(2024, 1, 5, 8, tzinfo=UTC)
    assert y1["ballast_kind"] == "led_driver" and y1["area_id"] == w["yard"]["id"]


def test_a_bad_row_among_good_ones_saves_nothing(
    client: TestClient, writer: dict[str, str]
) -> None:
    w = api_world(client, writer)
    api_fixture(client, writer, w["hall"]["id"], w["t8"]["id"], tag="KEEP")
    before = count(client, writer)
    body = csv_of(
        GOOD[0],
        f"{SITE},Main Hall,H-009,,T8-58,2,,,,,-5,",  # negative hours: line 3
        GOOD[1],
        f"{SITE},Main Hall,H-010,,T8-58,1,,1200,,,,",  # 1200 V: line 5
        f"{SITE},Nowhere,H-011,,T8-58,1,,,,,,",  # unknown area: line 6
        f"{SITE},Main Hall,H-012,,NO-SUCH,1,,,,,,",  # unknown lamp type: line 7
        "Atlantis,Main Hall,H-013,,T8-58,1,,,,,,",  # unknown site: line 8
        f"{SITE},Main Hall,H-001,,T8-58,1,,,,,,",  # tag twice in the file: line 9
        f"{SITE},Main Hall,,,T8-58,zero,,,2023-13-45,,,",  # three bad cells: line 10
    )
    r = post(client, writer, body)
    assert r.status_code == 422, r.text
    assert r.headers["content-type"].startswith("application/problem+json")
    errs = {(e["row"], e["field"]) for e in r.json()["errors"]}
    assert errs == {
        (3, "lamp_hours_at_install"),
        (5, "measured_voltage_v"),
        (6, "area"),
        (7, "lamp_type"),
        (8, "site"),
        (9, "tag"),
        (10, "tag"),
        (10, "lamps_per_fixture"),
        (10, "installed_on"),
    }
    assert r.json()["bad_rows"] == 7 and r.json()["error_count"] == 9
    assert count(client, writer) == before


def test_json_rows_count_from_one(client: TestClient, writer: dict[str, str]) -> None:
    api_world(client, writer)
    rows = [
        {
            "site": SITE,
            "area": "Main Hall",
            "tag": "J-1",
            "lamp_type": "T8-58",
            "lamps_per_fixture": 2,
        },
        {
            "site": SITE,
            "area": "Main Hall",
            "tag": "J-2",
            "lamp_type": "T8-58",
            "measured_voltage_v": 0,
        },
    ]
    r = post(client, writer, json.dumps(rows), "application/json")
    assert r.status_code == 422 and r.json()["errors"][0]["row"] == 2
    assert r.json()["errors"][0]["field"] == "measured_voltage_v"
    r = post(client, writer, json.dumps(rows[:1]), "application/json")
    assert r.status_code == 200 and r.json()["positions_created"] == 2


def test_existing_tag_is_409_unless_update(client: TestClient, writer: dict[str, str]) -> None:
    api_world(client, writer)
    assert post(client, writer, csv_of(*GOOD)).status_code == 200
    r = post(client, writer, csv_of(GOOD[0]))
    assert r.status_code == 409 and r.json()["errors"] == [
        {"row": 2, "field": "tag", "in": "body", "message": f"site '{SITE}' already has this tag"}
    ]
    changed = f"{SITE},Yard,H-001,Moved,LED-20,3,,,2023-02-01,,,"
    r = post(
        client,
        writer,
        csv_of(changed, GOOD[2].replace("1,,,,,,", "1,,,,,,")),
        q="?on_duplicate=update",
    )
    assert r.status_code == 200, r.text
    assert r.json() == {"rows": 2, "created": 0, "updated": 2, "positions_created": 1}
    h1 = client.get("/api/v1/fixtures?tag=H-001", headers=writer).json()["items"][0]
    assert h1["location"] == "Moved" and h1["ballast_kind"] == "led_driver"
    assert [p["position_no"] for p in h1["positions"]] == [1, 2, 3]
    r = post(
        client, writer, csv_of(f"{SITE},Yard,H-001,Moved,LED-20,1,,,,,,"), q="?on_duplicate=update"
    )
    assert r.status_code == 200
    h1 = client.get("/api/v1/fixtures?tag=H-001", headers=writer).json()["items"][0]
    assert [p["position_no"] for p in h1["positions"]] == [1]
    r = post(client, writer, csv_of(GOOD[0]), q="?on_duplicate=merge")
    assert r.status_code == 422


def test_export_round_trips_through_import(client: TestClient, writer: dict[str, str]) -> None:
    w = api_world(client, writer)
    assert post(client, writer, csv_of(*GOOD)).status_code == 200
    api_fixture(
        client, writer, w["annex"]["id"], w["t8"]["id"], tag="A-1", location='Shelf "B", top'
    )
    exported = client.get("/api/v1/fixtures/export?format=csv", headers=writer)
    assert exported.status_code == 200 and exported.headers["content-type"].startswith("text/csv")
    as_json = client.get("/api/v1/fixtures/export?format=json", headers=writer).json()
    assert len(as_json) == 4 and {r["tag"] for r in as_json} == {"H-001", "H-002", "Y-001", "A-1"}
    one_site = client.get(
        f"/api/v1/fixtures/export?format=json&site_id={w['site']['id']}", headers=writer
    )
    assert len(one_site.json()) == 3
    for f in client.get("/api/v1/fixtures?limit=100", headers=writer).json()["items"]:
        assert client.delete(f"/api/v1/fixtures/{f['id']}", headers=writer).status_code == 204
    assert count(client, writer) == (0, 0)
    r = post(client, writer, exported.text)
    assert r.status_code == 200, r.text
    again = client.get("/api/v1/fixtures/export?format=csv", headers=writer)
    assert again.text == exported.text
    # The JSON form imports too (as updates of the same fixtures).
    r = post(client, writer, json.dumps(as_json), "application/json", q="?on_duplicate=update")
    assert r.status_code == 200 and r.json()["updated"] == 4


def test_upload_shape_errors(client: TestClient, writer: dict[str, str]) -> None:
    api_world(client, writer)
    r = post(client, writer, "site,area,tag,colour\nx,y,z,red\n")
    assert r.status_code == 422 and r.json()["errors"][0] == {
        "row": 1,
        "field": "colour",
        "in": "body",
        "message": r.json()["errors"][0]["message"],
    }
    assert post(client, writer, "tag\nx\n", "application/xml").status_code == 415
    assert post(client, writer, "{not json", "application/json").status_code == 422
    assert post(client, writer, '{"tag": "x"}', "application/json").status_code == 422
    assert post(client, writer, "", "text/csv").status_code == 422


def test_imported_timestamps_are_stored_like_orm_ones(
    client: TestClient, writer: dict[str, str], db: Session
) -> None:
    w = api_world(client, writer)
    at = "2024-01-05T10:00:00+02:00"
    api_fixture(client, writer, w["hall"]["id"], w["t8"]["id"], tag="ORM", lamps_installed_at=at)
    assert (
        post(client, writer, csv_of(f"{SITE},Main Hall,BULK,,T8-58,1,,,,{at},,")).status_code == 200
    )
    # Raw stored text of both rows: the same value must be stored the same way, so that
    # SQL comparisons and ordering on timestamps work across imported and API-made rows.
    stored = db.execute(
        text(
            "SELECT f.tag, CAST(p.lamp_installed_at AS VARCHAR(60)) FROM lamp_positions p "
            "JOIN fixtures f ON f.id = p.fixture_id ORDER BY f.tag"
        )
    ).all()
    assert [t for t, _ in stored] == ["BULK", "ORM"] and stored[0][1] == stored[1][1]
    later = db.scalar(
        text("SELECT COUNT(*) FROM lamp_positions WHERE lamp_installed_at >= :t"),
        {"t": datetime(2024, 1, 5, 8, tzinfo=UTC)},
    )
    assert later == 2


def test_missing_required_column_is_one_header_error(
    client: TestClient, writer: dict[str, str]
) -> None:
    api_world(client, writer)
    r = post(client, writer, "site,area,lamp_type\n" + f"{SITE},Main Hall,T8-58\n" * 50)
    assert r.status_code == 422
    assert r.json()["errors"] == [
        {
            "row": 1,
            "field": "tag",
            "in": "body",
            "message": "required column is missing from the header",
        }
    ]
