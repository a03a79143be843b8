"""Shared builders for register tests: a site, areas and lamp types through the API."""

from __future__ import annotations

from typing import Any

from fastapi.testclient import TestClient

from tests.register.test_sites import make_site

LAMP_TYPE: dict[str, Any] = {
    "code": "T8-58",
    "technology": "linear_fluorescent",
    "rated_watts": 58,
    "rated_volts": 230,
    "rated_life_h": 24000,
}


def make_area(
    client: TestClient, headers: dict[str, str], site_id: int, **over: Any
) -> dict[str, Any]:
    """Create an area through the API and return its body."""
    body = {"site_id": site_id, "name": "Main Hall", "access_method": "lift", **over}
    r = client.post("/api/v1/areas", json=body, headers=headers)
    assert r.status_code == 201, r.text
    return r.json()


def make_lamp_type(client: TestClient, headers: dict[str, str], **over: Any) -> dict[str, Any]:
    """Create a lamp type through the API and return its body."""
    r = client.post("/api/v1/lamp-types", json={**LAMP_TYPE, **over}, headers=headers)
    assert r.status_code == 201, r.text
    return r.json()


def make_fixture(
    client: TestClient, headers: dict[str, str], area_id: int, lamp_type_id: int, **over: Any
) -> dict[str, Any]:
    """Create a fixture through the API and return its body."""
    body = {"area_id": area_id, "lamp_type_id": lamp_type_id, "tag": "F-001", **over}
    r = client.post("/api/v1/fixtures", json=body, headers=headers)
    assert r.status_code == 201, r.text
    return r.json()


def world(client: TestClient, headers: dict[str, str]) -> dict[str, Any]:
    """A site with two areas and two lamp types, plus a second site with one area."""
    site = make_site(client, headers)
    other = make_site(client, headers, name="Quarry Annex")
    return {
        "site": site,
        "other": other,
        "hall": make_area(client, headers, site["id"]),
        "yard": make_area(client, headers, site["id"], name="Yard", access_method="ladder"),
        "annex": make_area(client, headers, other["id"], name="Annex Floor"),
        "t8": make_lamp_type(client, headers),
        "led": make_lamp_type(client, headers, code="LED-20", technology="led", rated_watts=20),
    }
