"""Lamp types over the API: CRUD, filters, sort, pagination, validation and the model block."""

from __future__ import annotations

import math
from typing import Any

import pytest
from fastapi.testclient import TestClient

from service.catalogue.mortality import fit_mortality_points
from service.reliability.technologies import TECHNOLOGY_DEFAULTS
from service.reliability.weibull import scale_from_rated_life

T8: dict[str, Any] = {
    "code": "T8-36-840",
    "technology": "linear_fluorescent",
    "rated_watts": 36,
    "rated_volts": 230,
    "rated_life_h": 20000,
    "unit_price": 2.4,
}


def make_type(client: TestClient, headers: dict[str, str], **over: Any) -> dict[str, Any]:
    """Create a lamp type through the API and return its body."""
    r = client.post("/api/v1/lamp-types", json={**T8, **over}, headers=headers)
    assert r.status_code == 201, r.text
    return r.json()


def test_create_read_update_delete(client: TestClient, writer: dict[str, str]) -> None:
    lt = make_type(client, writer)
    d = TECHNOLOGY_DEFAULTS["linear_fluorescent"]
    assert lt["rated_percentile"] == 50.0 and lt["contains_mercury"] is True
    m = lt["model"]
    assert m["shape"] == d.shape and m["sources"]["shape"] == "default"
    # eta = L50 / (ln 2)^(1/beta) [Abernethy, Weibull Handbook]
    assert m["scale_h"] == pytest.approx(20000 / math.log(2) ** (1 / d.shape))
    assert m["lumen_curve"]["assumed"] is True and m["ballast_behaviour"] == "electronic"
    got = client.get(f"/api/v1/lamp-types/{lt['id']}", headers=writer).json()
    assert got["code"] == T8["code"]
    r = client.patch(
        f"/api/v1/lamp-types/{lt['id']}",
        json={"weibull_shape": 6.0, "lumen_points": [[0, 1], [10000, 0.9], [20000, 0.85]]},
        headers=writer,
    )
    assert r.status_code == 200, r.text
    m = r.json()["model"]
    assert m["shape"] == 6.0 and m["sources"]["shape"] == "catalogue"
    assert m["scale_h"] == pytest.approx(float(scale_from_rated_life(20000, 6.0, 50)))
    assert m["lumen_curve"]["assumed"] is False
    assert m["lumen_curve"]["points"] == [[0, 1], [10000, 0.9], [20000, 0.85]]
    assert r.json()["rated_watts"] == 36  # untouched fields stay
    assert client.delete(f"/api/v1/lamp-types/{lt['id']}", headers=writer).status_code == 204
    r = client.get(f"/api/v1/lamp-types/{lt['id']}", headers=writer)
    assert r.status_code == 404
    assert r.headers["content-type"].startswith("application/problem+json")


def test_mortality_points_fit_the_shape_the_fit_gives(
    client: TestClient, writer: dict[str, str]
) -> None:
    pts = [[50, 96], [75, 80], [100, 50], [125, 18]]
    lt = make_type(client, writer, mortality_points=pts)
    expected = fit_mortality_points(pts).shape
    assert lt["model"]["shape"] == pytest.approx(expected)
    assert lt["model"]["sources"]["shape"] == "fit"
    assert lt["model"]["scale_h"] == pytest.approx(
        float(scale_from_rated_life(20000, expected, 50))
    )


def test_led_keeps_b50_unless_given(client: TestClient, writer: dict[str, str]) -> None:
    lt = make_type(
        client, writer, code="LED-9", technology="led", rated_life_h=25000, rated_watts=9
    )
    assert lt["rated_percentile"] == 50.0 and lt["contains_mercury"] is False
    assert lt["model"]["ballast_behaviour"] == "led_driver"
    lt = make_type(client, writer, code="LED-10", technology="led", rated_percentile=10)
    assert lt["rated_percentile"] == 10


def test_filament_model_has_no_ballast_gain(client: TestClient, writer: dict[str, str]) -> None:
    lt = make_type(client, writer, code="HAL", technology="halogen", rated_life_h=2000)
    assert lt["model"]["is_filament"] and lt["model"]["ballast_gain"] is None
    assert lt["model"]["lumen_curve"]["basis"] == "rated_life_fraction"


def test_list_filters_sort_and_pages(
    client: TestClient, reader: dict[str, str], writer: dict[str, str]
) -> None:
    make_type(client, writer, code="A-T8", rated_watts=58)
    make_type(client, writer, code="B-LED", technology="led", rated_watts=12)
    make_type(client, writer, code="C-LED", technology="led", rated_watts=20)
    make_type(client, writer, code="D-HAL", technology="halogen", rated_watts=50)
    r = client.get("/api/v1/lamp-types?technology=led&sort=-rated_watts", headers=reader)
    body = r.json()
    assert body["total"] == 2 and [i["code"] for i in body["items"]] == ["C-LED", "B-LED"]
    r = client.get("/api/v1/lamp-types?code=led", headers=reader)
    assert {i["code"] for i in r.json()["items"]} == {"B-LED", "C-LED"}
    r = client.get("/api/v1/lamp-types?contains_mercury=true", headers=reader)
    assert [i["code"] for i in r.json()["items"]] == ["A-T8"]
    r = client.get("/api/v1/lamp-types?sort=code&limit=2&offset=2", headers=reader)
    body = r.json()
    assert body["total"] == 4 and [i["code"] for i in body["items"]] == ["C-LED", "D-HAL"]
    r = client.get("/api/v1/lamp-types?sort=colour", headers=reader)
    assert r.status_code == 422 and r.json()["errors"][0]["field"] == "sort"


def test_reader_cannot_write(client: TestClient, reader: dict[str, str]) -> None:
    assert client.post("/api/v1/lamp-types", json=T8, headers=reader).status_code == 403
    assert client.get("/api/v1/lamp-types").status_code == 401


def test_duplicate_code_is_409(client: TestClient, writer: dict[str, str]) -> None:
    make_type(client, writer)
    r = client.post("/api/v1/lamp-types", json=T8, headers=writer)
    assert r.status_code == 409 and r.json()["field"] == "code"
    other = make_type(client, writer, code="OTHER")
    r = client.patch(f"/api/v1/lamp-types/{other['id']}", json={"code": T8["code"]}, headers=writer)
    assert r.status_code == 409


BAD: list[tuple[dict[str, Any], str]] = [
    ({"technology": "plasma"}, "technology"),
    ({"rated_percentile": 0}, "rated_percentile"),
    ({"rated_percentile": 100}, "rated_percentile"),
    ({"weibull_shape": 0}, "weibull_shape"),
    ({"weibull_shape": -1.5}, "weibull_shape"),
    ({"rated_watts": 0}, "rated_watts"),
    ({"rated_volts": 0}, "rated_volts"),
    ({"rated_volts": 1200}, "rated_volts"),
    ({"rated_life_h": -5}, "rated_life_h"),
    ({"rated_life_h": "long"}, "rated_life_h"),
    ({"life_exponent": 0}, "life_exponent"),
    ({"light_exponent": -1}, "light_exponent"),
    ({"power_exponent": 0}, "power_exponent"),
    ({"ballast_behaviour": "magnetic"}, "ballast_behaviour"),
    ({"ballast_behaviour": "none"}, "ballast_behaviour"),
    ({"lumen_points": [[0, 1.0], [5000, 1.3]]}, "lumen_points"),
    ({"lumen_points": [[0, 1.0], [5000, 0]]}, "lumen_points"),
    ({"lumen_points": [[-1, 1.0]]}, "lumen_points"),
    ({"lumen_points": [[0, 0.9], [5000, 0.95]]}, "lumen_points"),
    ({"mortality_points": [[100, 50]]}, "mortality_points"),
    ({"mortality_points": [[0, 90], [100, 50]]}, "mortality_points"),
    ({"mortality_points": [[50, 100], [100, 50]]}, "mortality_points"),
    ({"driver_min_volts": 250, "driver_max_volts": 200}, "driver_min_volts"),
    ({"driver_min_volts": 200}, "driver_max_volts"),
    ({"second_hours_per_start": 12}, "second_cycle_life_h"),
    ({"colour": "warm"}, "colour"),
    ({"contains_mercury": "maybe"}, "contains_mercury"),
]


@pytest.mark.parametrize(("over", "field"), BAD)
def test_bad_values_are_422_naming_the_field(
    client: TestClient, writer: dict[str, str], over: dict[str, Any], field: str
) -> None:
    r = client.post("/api/v1/lamp-types", json={**T8, **over}, headers=writer)
    assert r.status_code == 422, r.text
    assert r.headers["content-type"].startswith("application/problem+json")
    assert field in {e["field"].split(".")[0] for e in r.json()["errors"]}


@pytest.mark.parametrize(
    "missing", ["code", "technology", "rated_watts", "rated_volts", "rated_life_h"]
)
def test_missing_fields_are_422(client: TestClient, writer: dict[str, str], missing: str) -> None:
    body = {k: v for k, v in T8.items() if k != missing}
    r = client.post("/api/v1/lamp-types", json=body, headers=writer)
    assert r.status_code == 422 and r.json()["errors"][0]["field"] == missing


def test_patch_is_checked_as_a_whole(client: TestClient, writer: dict[str, str]) -> None:
    lt = make_type(
        client, writer, code="LED-D", technology="led", driver_min_volts=200, driver_max_volts=250
    )
    url = f"/api/v1/lamp-types/{lt['id']}"
    r = client.patch(url, json={"driver_max_volts": 150}, headers=writer)
    assert r.status_code == 422 and r.json()["errors"][0]["field"] == "driver_min_volts"
    r = client.patch(
        url, json={"technology": "halogen", "ballast_behaviour": "led_driver"}, headers=writer
    )
    assert r.status_code == 422
    r = client.patch(url, json={"rated_volts": -3}, headers=writer)
    assert r.status_code == 422 and r.json()["errors"][0]["field"] == "rated_volts"
    assert client.patch("/api/v1/lamp-types/999999", json={}, headers=writer).status_code == 404
    assert client.get(url, headers=writer).json()["driver_max_volts"] == 250  # unchanged


def test_unknown_ids_are_404(client: TestClient, writer: dict[str, str]) -> None:
    for method in ("get", "delete"):
        r = getattr(client, method)("/api/v1/lamp-types/424242", headers=writer)
        assert r.status_code == 404 and r.json()["status"] == 404
    r = client.patch("/api/v1/lamp-types/424242", json={"rated_watts": 5}, headers=writer)
    assert r.status_code == 404
