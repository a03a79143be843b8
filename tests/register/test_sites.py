"""Sites over the API: CRUD, filters, sorting, pagination and bad input."""

from __future__ import annotations

from fastapi.testclient import TestClient

from tests.factories import SITE, api_site


def test_create_read_update_delete(client: TestClient, writer: dict[str, str]) -> None:
    site = api_site(client, writer)
    assert site["weekly_run_weekday"] == 0 and site["lookahead_weeks"] == 4
    got = client.get(f"/api/v1/sites/{site['id']}", headers=writer).json()
    assert got["name"] == SITE["name"]
    r = client.patch(
        f"/api/v1/sites/{site['id']}", json={"labour_rate_per_h": 41.5}, headers=writer
    )
    assert r.status_code == 200 and r.json()["labour_rate_per_h"] == 41.5
    assert r.json()["name"] == SITE["name"]  # untouched fields stay
    assert client.delete(f"/api/v1/sites/{site['id']}", headers=writer).status_code == 204
    r = client.get(f"/api/v1/sites/{site['id']}", headers=writer)
    assert r.status_code == 404
    assert r.headers["content-type"].startswith("application/problem+json")


def test_list_filters_sorts_and_pages(client: TestClient, writer: dict[str, str]) -> None:
    for name in ("Beta Hall", "Alpha Works", "Gamma Yard"):
        api_site(client, writer, name=name)
    r = client.get("/api/v1/sites?sort=-name&limit=2", headers=writer).json()
    assert r["total"] == 3 and [s["name"] for s in r["items"]] == ["Gamma Yard", "Beta Hall"]
    r = client.get("/api/v1/sites?sort=-name&limit=2&offset=2", headers=writer).json()
    assert [s["name"] for s in r["items"]] == ["Alpha Works"]
    r = client.get("/api/v1/sites?name=works", headers=writer).json()
    assert r["total"] == 1 and r["items"][0]["name"] == "Alpha Works"


def test_bad_input_names_the_field_and_writes_nothing(
    client: TestClient, writer: dict[str, str]
) -> None:
    bad = {**SITE, "nominal_voltage_v": 1200, "time_zone": "Mars/Olympus"}
    r = client.post("/api/v1/sites", json=bad, headers=writer)
    assert r.status_code == 422
    body = r.json()
    assert r.headers["content-type"].startswith("application/problem+json")
    assert {e["field"] for e in body["errors"]} == {"nominal_voltage_v", "time_zone"}
    assert client.get("/api/v1/sites", headers=writer).json()["total"] == 0


def test_duplicate_name_is_a_conflict(client: TestClient, writer: dict[str, str]) -> None:
    api_site(client, writer)
    r = client.post("/api/v1/sites", json=SITE, headers=writer)
    assert r.status_code == 409 and r.json()["status"] == 409


def test_unknown_sort_field_is_422(client: TestClient, reader: dict[str, str]) -> None:
    r = client.get("/api/v1/sites?sort=password", headers=reader)
    assert r.status_code == 422 and r.json()["errors"][0]["field"] == "sort"
