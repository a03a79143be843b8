"""Fixtures and lamp positions over the API."""

from __future__ import annotations

from datetime import UTC, datetime, timedelta
from typing import Any

import pytest
from fastapi.testclient import TestClient

from tests.factories import api_fixture, api_world


def when(s: str) -> datetime:
    """Parse an ISO timestamp from a response."""
    return datetime.fromisoformat(s)


def test_create_makes_positions_from_lamps_installed_at(
    client: TestClient, writer: dict[str, str]
) -> None:
    w = api_world(client, writer)
    fx = api_fixture(
        client,
        writer,
        w["hall"]["id"],
        w["t8"]["id"],
        lamps_per_fixture=3,
        lamps_installed_at="2024-03-01T08:30:00+01:00",
        lamp_hours_at_install=120,
    )
    assert fx["site_id"] == w["site"]["id"] and fx["ballast_kind"] == "electronic"
    assert [p["position_no"] for p in fx["positions"]] == [1, 2, 3]
    for p in fx["positions"]:
        assert when(p["lamp_installed_at"]) == datetime(2024, 3, 1, 7, 30, tzinfo=UTC)
        assert p["hours_at_install"] == 120
    got = client.get(f"/api/v1/fixtures/{fx['id']}/positions", headers=writer).json()
    assert [p["id"] for p in got] == [p["id"] for p in fx["positions"]]


def test_install_time_defaults(client: TestClient, writer: dict[str, str]) -> None:
    w = api_world(client, writer)
    fx = api_fixture(client, writer, w["hall"]["id"], w["t8"]["id"], installed_on="2023-05-04")
    assert when(fx["positions"][0]["lamp_installed_at"]) == datetime(2023, 5, 4, tzinfo=UTC)
    before = datetime.now(UTC)
    fx = api_fixture(client, writer, w["hall"]["id"], w["t8"]["id"], tag="F-002")
    at = when(fx["positions"][0]["lamp_installed_at"])
    assert before - timedelta(seconds=5) <= at <= datetime.now(UTC) + timedelta(seconds=5)


def test_read_update_delete(client: TestClient, writer: dict[str, str]) -> None:
    w = api_world(client, writer)
    fx = api_fixture(client, writer, w["hall"]["id"], w["t8"]["id"], lamps_per_fixture=2)
    url = f"/api/v1/fixtures/{fx['id']}"
    first_ids = [p["id"] for p in fx["positions"]]
    r = client.patch(url, json={"lamps_per_fixture": 4, "location": "Bay 3"}, headers=writer)
    assert r.status_code == 200, r.text
    pos = r.json()["positions"]
    assert [p["position_no"] for p in pos] == [1, 2, 3, 4]
    assert [p["id"] for p in pos[:2]] == first_ids  # the old lamps stay
    r = client.patch(url, json={"lamps_per_fixture": 1}, headers=writer)
    assert [p["id"] for p in r.json()["positions"]] == first_ids[:1]
    r = client.patch(url, json={"area_id": w["yard"]["id"]}, headers=writer)
    assert r.status_code == 200 and r.json()["area_id"] == w["yard"]["id"]
    r = client.patch(url, json={"lamp_type_id": w["led"]["id"]}, headers=writer)
    assert r.status_code == 200 and r.json()["ballast_kind"] == "led_driver"  # followed
    assert client.get(url, headers=writer).json()["location"] == "Bay 3"
    assert client.delete(url, headers=writer).status_code == 204
    assert client.get(url, headers=writer).status_code == 404
    assert client.get(f"{url}/positions", headers=writer).status_code == 404


def test_move_to_another_site_is_422(client: TestClient, writer: dict[str, str]) -> None:
    w = api_world(client, writer)
    fx = api_fixture(client, writer, w["hall"]["id"], w["t8"]["id"])
    r = client.patch(
        f"/api/v1/fixtures/{fx['id']}", json={"area_id": w["annex"]["id"]}, headers=writer
    )
    assert r.status_code == 422 and r.json()["errors"][0]["field"] == "area_id"


def test_unknown_area_or_lamp_type_is_404_naming_the_field(
    client: TestClient, writer: dict[str, str]
) -> None:
    w = api_world(client, writer)
    body = {"area_id": 999999, "lamp_type_id": w["t8"]["id"], "tag": "X"}
    r = client.post("/api/v1/fixtures", json=body, headers=writer)
    assert r.status_code == 404 and r.json()["errors"][0]["field"] == "area_id"
    body = {"area_id": w["hall"]["id"], "lamp_type_id": 999999, "tag": "X"}
    r = client.post("/api/v1/fixtures", json=body, headers=writer)
    assert r.status_code == 404 and r.json()["errors"][0]["field"] == "lamp_type_id"
    fx = api_fixture(client, writer, w["hall"]["id"], w["t8"]["id"])
    r = client.patch(f"/api/v1/fixtures/{fx['id']}", json={"lamp_type_id": 999999}, headers=writer)
    assert r.status_code == 404 and r.json()["errors"][0]["field"] == "lamp_type_id"
    assert client.get("/api/v1/fixtures/999999", headers=writer).status_code == 404
    assert client.patch("/api/v1/positions/999999", json={}, headers=writer).status_code == 404


def test_duplicate_tag_within_site_is_409(client: TestClient, writer: dict[str, str]) -> None:
    w = api_world(client, writer)
    api_fixture(client, writer, w["hall"]["id"], w["t8"]["id"])
    body = {"area_id": w["yard"]["id"], "lamp_type_id": w["t8"]["id"], "tag": "F-001"}
    r = client.post("/api/v1/fixtures", json=body, headers=writer)
    assert r.status_code == 409 and r.json()["field"] == "tag"
    api_fixture(client, writer, w["annex"]["id"], w["t8"]["id"])  # other site: fine
    fx = api_fixture(client, writer, w["hall"]["id"], w["t8"]["id"], tag="F-002")
    r = client.patch(f"/api/v1/fixtures/{fx['id']}", json={"tag": "F-001"}, headers=writer)
    assert r.status_code == 409


def test_lamp_type_in_use_cannot_be_deleted(client: TestClient, writer: dict[str, str]) -> None:
    w = api_world(client, writer)
    api_fixture(client, writer, w["hall"]["id"], w["t8"]["id"])
    api_fixture(client, writer, w["yard"]["id"], w["t8"]["id"], tag="F-002")
    r = client.delete(f"/api/v1/lamp-types/{w['t8']['id']}", headers=writer)
    assert r.status_code == 409 and r.json()["fixtures"] == 2 and "2 fixture" in r.json()["detail"]
    assert client.get(f"/api/v1/lamp-types/{w['t8']['id']}", headers=writer).status_code == 200


BAD: list[tuple[dict[str, Any], str]] = [
    ({"measured_voltage_v": 0}, "measured_voltage_v"),
    ({"measured_voltage_v": 1000.5}, "measured_voltage_v"),
    ({"lamp_hours_at_install": -1}, "lamp_hours_at_install"),
    ({"lamps_per_fixture": 0}, "lamps_per_fixture"),
    ({"lamps_per_fixture": "two"}, "lamps_per_fixture"),
    ({"ballast_kind": "magnetic"}, "ballast_kind"),
    ({"ballast_kind": "none"}, "ballast_kind"),  # a fluorescent lamp needs a ballast
    ({"tag": ""}, "tag"),
    ({"installed_on": "yesterday"}, "installed_on"),
    ({"lamps_installed_at": "2999-01-01T00:00:00Z"}, "lamps_installed_at"),
    ({"serial": "x"}, "serial"),
]


@pytest.mark.parametrize(("over", "field"), BAD)
def test_bad_fixture_values_are_422(
    client: TestClient, writer: dict[str, str], over: dict[str, Any], field: str
) -> None:
    w = api_world(client, writer)
    body = {"area_id": w["hall"]["id"], "lamp_type_id": w["t8"]["id"], "tag": "F-9", **over}
    r = client.post("/api/v1/fixtures", json=body, headers=writer)
    assert r.status_code == 422, r.text
    assert field in {e["field"] for e in r.json()["errors"]}
    assert client.get("/api/v1/fixtures", headers=writer).json()["total"] == 0


def test_missing_fields_are_422(client: TestClient, writer: dict[str, str]) -> None:
    r = client.post("/api/v1/fixtures", json={"tag": "F"}, headers=writer)
    assert r.status_code == 422
    assert {e["field"] for e in r.json()["errors"]} == {"area_id", "lamp_type_id"}


def test_filters_sort_and_pages(client: TestClient, writer: dict[str, str]) -> None:
    w = api_world(client, writer)
    api_fixture(client, writer, w["hall"]["id"], w["t8"]["id"], tag="HALL-2")
    api_fixture(client, writer, w["hall"]["id"], w["led"]["id"], tag="HALL-1")
    api_fixture(client, writer, w["yard"]["id"], w["t8"]["id"], tag="YARD-1")
    api_fixture(client, writer, w["annex"]["id"], w["t8"]["id"], tag="ANNEX-1")

    def tags(q: str) -> list[str]:
        return [
            f["tag"] for f in client.get(f"/api/v1/fixtures?{q}", headers=writer).json()["items"]
        ]

    assert tags(f"site_id={w['site']['id']}&sort=tag") == ["HALL-1", "HALL-2", "YARD-1"]
    assert tags(f"area_id={w['hall']['id']}&sort=-tag") == ["HALL-2", "HALL-1"]
    assert tags(f"lamp_type_id={w['led']['id']}") == ["HALL-1"]
    assert tags("tag=yard") == ["YARD-1"]
    page = client.get("/api/v1/fixtures?sort=tag&limit=2&offset=1", headers=writer).json()
    assert page["total"] == 4 and [f["tag"] for f in page["items"]] == ["HALL-1", "HALL-2"]
    assert len(page["items"][0]["positions"]) == 1


def test_position_correction(client: TestClient, writer: dict[str, str]) -> None:
    w = api_world(client, writer)
    fx = api_fixture(client, writer, w["hall"]["id"], w["t8"]["id"], lamps_per_fixture=2)
    pid = fx["positions"][1]["id"]
    r = client.patch(
        f"/api/v1/positions/{pid}",
        json={"lamp_installed_at": "2022-01-02T03:04:05+00:00", "hours_at_install": 50},
        headers=writer,
    )
    assert r.status_code == 200, r.text
    assert when(r.json()["lamp_installed_at"]) == datetime(2022, 1, 2, 3, 4, 5, tzinfo=UTC)
    assert r.json()["hours_at_install"] == 50
    for body, field in [
        ({"hours_at_install": -3}, "hours_at_install"),
        ({"lamp_installed_at": "2999-01-01T00:00:00Z"}, "lamp_installed_at"),
        ({"lamp_installed_at": None}, "lamp_installed_at"),
    ]:
        r = client.patch(f"/api/v1/positions/{pid}", json=body, headers=writer)
        assert r.status_code == 422 and r.json()["errors"][0]["field"] == field


def test_reader_cannot_write(client: TestClient, reader: dict[str, str]) -> None:
    assert client.post("/api/v1/fixtures", json={}, headers=reader).status_code == 403
    assert client.get("/api/v1/fixtures", headers=reader).status_code == 200
