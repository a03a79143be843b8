"""Areas over the API: CRUD, filters, sort, pagination and bad input."""

from __future__ import annotations

from fastapi.testclient import TestClient

from tests.factories import api_area, api_site


def test_create_read_update_delete(client: TestClient, writer: dict[str, str]) -> None:
    site = api_site(client, writer)
    area = api_area(client, writer, site["id"], hours_per_day=12, days_per_week=5)
    assert area["burn_hours_per_week"] == 60 and area["site_id"] == site["id"]
    url = f"/api/v1/areas/{area['id']}"
    assert client.get(url, headers=writer).json()["name"] == "Main Hall"
    r = client.patch(
        url, json={"weekly_burn_hours": 80, "access_method": "scaffold"}, headers=writer
    )
    assert r.status_code == 200 and r.json()["burn_hours_per_week"] == 80
    assert r.json()["access_method"] == "scaffold" and r.json()["name"] == "Main Hall"
    assert client.delete(url, headers=writer).status_code == 204
    assert client.get(url, headers=writer).status_code == 404


def test_filters_sort_and_pages(client: TestClient, writer: dict[str, str]) -> None:
    a = api_site(client, writer)
    b = api_site(client, writer, name="Second Site")
    api_area(client, writer, a["id"], name="Boiler Room", access_method="ladder")
    api_area(client, writer, a["id"], name="Atrium", access_method="lift")
    api_area(client, writer, b["id"], name="Corridor", access_method="floor")
    r = client.get(f"/api/v1/areas?site_id={a['id']}&sort=name", headers=writer).json()
    assert r["total"] == 2 and [x["name"] for x in r["items"]] == ["Atrium", "Boiler Room"]
    r = client.get("/api/v1/areas?access_method=floor", headers=writer).json()
    assert [x["name"] for x in r["items"]] == ["Corridor"]
    r = client.get("/api/v1/areas?name=ROOM", headers=writer).json()
    assert [x["name"] for x in r["items"]] == ["Boiler Room"]
    r = client.get("/api/v1/areas?sort=-name&limit=1&offset=1", headers=writer).json()
    assert r["total"] == 3 and [x["name"] for x in r["items"]] == ["Boiler Room"]


def test_unknown_site_is_404_naming_site_id(client: TestClient, writer: dict[str, str]) -> None:
    r = client.post("/api/v1/areas", json={"site_id": 987654, "name": "X"}, headers=writer)
    assert r.status_code == 404 and r.json()["errors"][0]["field"] == "site_id"


def test_duplicate_name_within_site_is_409(client: TestClient, writer: dict[str, str]) -> None:
    a = api_site(client, writer)
    b = api_site(client, writer, name="Second Site")
    api_area(client, writer, a["id"])
    r = client.post("/api/v1/areas", json={"site_id": a["id"], "name": "Main Hall"}, headers=writer)
    assert r.status_code == 409
    api_area(client, writer, b["id"])  # the same name in another site is fine
    other = api_area(client, writer, a["id"], name="Other")
    r = client.patch(f"/api/v1/areas/{other['id']}", json={"name": "Main Hall"}, headers=writer)
    assert r.status_code == 409


def test_bad_values_name_the_field(client: TestClient, writer: dict[str, str]) -> None:
    site = api_site(client, writer)
    base = {"site_id": site["id"], "name": "Bad"}
    for over, field in [
        ({"access_method": "rope"}, "access_method"),
        ({"hours_per_day": 25, "days_per_week": 5}, "hours_per_day"),
        ({"mounting_height_m": -2}, "mounting_height_m"),
        ({"starts_per_day": "often"}, "starts_per_day"),
    ]:
        r = client.post("/api/v1/areas", json={**base, **over}, headers=writer)
        assert r.status_code == 422, over
        assert field in {e["field"] for e in r.json()["errors"]}
    r = client.post("/api/v1/areas", json={"name": "No site"}, headers=writer)
    assert r.status_code == 422 and r.json()["errors"][0]["field"] == "site_id"
    area = api_area(client, writer, site["id"])
    r = client.patch(f"/api/v1/areas/{area['id']}", json={"hours_per_day": 8}, headers=writer)
    assert r.status_code == 422 and r.json()["errors"][0]["field"] == "days_per_week"
    r = client.patch(f"/api/v1/areas/{area['id']}", json={"name": None}, headers=writer)
    assert r.status_code == 422 and r.json()["errors"][0]["field"] == "name"
    assert client.patch("/api/v1/areas/999999", json={}, headers=writer).status_code == 404


def test_unknown_area_ids_are_404(client: TestClient, writer: dict[str, str]) -> None:
    assert client.get("/api/v1/areas/424242", headers=writer).status_code == 404
    assert client.delete("/api/v1/areas/424242", headers=writer).status_code == 404
