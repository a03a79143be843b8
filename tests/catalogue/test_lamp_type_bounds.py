"""Lamp-type numbers that parse but would break the forecasts: a 422 naming the field.

Found by fuzzing: a weibull_shape, rated_volts or rated_life_h of 5e-324 was stored, and
every forecast, plan and listing that read the lamp type then failed (an infinite Weibull
scale, shown as null, or a 500); lumen points 5e-324 apart overflowed the interpolant; a
nearly flat mortality curve overflowed the shape fit on create.
"""

from __future__ import annotations

from typing import Any

import pytest
from fastapi.testclient import TestClient
from sqlalchemy import func, select
from sqlalchemy.orm import Session

from service.catalogue.models import LampType
from tests.catalogue.test_lamp_types import T8, make_type

TINY = 5e-324  # the smallest positive double

BAD: list[tuple[dict[str, Any], str]] = [
    ({"weibull_shape": TINY}, "weibull_shape"),
    ({"weibull_shape": 0.05}, "weibull_shape"),
    ({"rated_volts": TINY}, "rated_volts"),
    ({"rated_volts": 0.5}, "rated_volts"),
    ({"rated_watts": TINY}, "rated_watts"),
    ({"rated_life_h": TINY}, "rated_life_h"),
    ({"rated_percentile": TINY}, "rated_percentile"),
    ({"rated_percentile": 99.99}, "rated_percentile"),
    ({"rated_hours_per_start": 1e-9}, "rated_hours_per_start"),
    ({"life_exponent": 1e6}, "life_exponent"),
    ({"initial_lumens": 1e300}, "initial_lumens"),
    ({"unit_price": 1e300}, "unit_price"),
    ({"lumen_points": [[0, 1.0], [TINY, 0.9]]}, "lumen_points"),
    ({"lumen_points": [[0, 1.0], [1e12, 0.5]]}, "lumen_points"),
    ({"mortality_points": [[100, 50], [200, 50 - 1e-12]]}, "mortality_points"),
    ({"mortality_points": [[1, 1e-300], [2, 1e-301]]}, "mortality_points"),
]


@pytest.mark.parametrize(("over", "field"), BAD)
def test_numbers_that_break_the_model_are_refused(
    client: TestClient, db: Session, writer: dict[str, str], over: dict[str, Any], field: str
) -> None:
    before = db.scalar(select(func.count()).select_from(LampType))
    r = client.post("/api/v1/lamp-types", json={**T8, **over}, headers=writer)
    assert r.status_code == 422, r.text
    assert r.headers["content-type"].startswith("application/problem+json")
    assert field in {e["field"] for e in r.json()["errors"]}
    assert db.scalar(select(func.count()).select_from(LampType)) == before


@pytest.mark.parametrize(
    "raw", ['{"weibull_shape": Infinity}', '{"rated_life_h": NaN}', '{"unit_price": 1e400}']
)
def test_non_finite_json_numbers_are_refused_on_update(
    client: TestClient, writer: dict[str, str], raw: str
) -> None:
    # Python's JSON parser reads NaN, Infinity and 1e400 (as inf); the schema must not.
    lt = make_type(client, writer)
    r = client.patch(
        f"/api/v1/lamp-types/{lt['id']}",
        content=raw.encode(),
        headers={**writer, "content-type": "application/json"},
    )
    assert r.status_code == 422, r.text
    field = raw.split('"')[1]
    assert field in {e["field"] for e in r.json()["errors"]}
    assert client.get(f"/api/v1/lamp-types/{lt['id']}", headers=writer).json() == lt


def test_bounds_keep_real_lamps(client: TestClient, writer: dict[str, str]) -> None:
    # A 12 V halogen with a steep curve, and a shape fitted from a believable mortality curve.
    lt = make_type(
        client,
        writer,
        code="MR16-12",
        technology="halogen",
        rated_volts=12,
        rated_watts=35,
        rated_life_h=4000,
        ballast_behaviour="none",
        weibull_shape=0.1,
        rated_percentile=0.1,
    )
    assert lt["model"]["shape"] == 0.1
    fitted = make_type(client, writer, code="FIT", mortality_points=[[50, 95], [100, 50]])
    assert 0.1 <= fitted["model"]["shape"] <= 50


def test_import_cells_with_non_finite_json_or_oversized_extra(
    client: TestClient, db: Session, writer: dict[str, str]
) -> None:
    # Found by hand: a CSV cell '{"a": NaN}' in extra was parsed and stored; PostgreSQL's
    # json column refuses NaN, so the import answered 500 there.
    head = "code,technology,rated_watts,rated_volts,rated_life_h,extra,lumen_points\n"
    big = '"{""a"": ""' + "x" * 20_000 + '""}"'
    csv = (
        head
        + 'OK-1,led,10,230,50000,"{""a"": 1}",\n'
        + 'BAD-1,led,10,230,50000,"{""a"": NaN}",\n'
        + f"BAD-2,led,10,230,50000,{big},\n"
        + 'BAD-3,led,10,230,50000,,"[[0, 1], [1000, Infinity]]"\n'
    )
    before = db.scalar(select(func.count()).select_from(LampType))
    r = client.post(
        "/api/v1/lamp-types/import",
        content=csv.encode(),
        headers={**writer, "content-type": "text/csv"},
    )
    assert r.status_code == 422, r.text
    got = {(e["row"], e["field"].split(".")[0]) for e in r.json()["errors"]}
    assert got == {(3, "extra"), (4, "extra"), (5, "lumen_points")}, r.json()
    assert db.scalar(select(func.count()).select_from(LampType)) == before


def test_point_lists_are_capped(client: TestClient, writer: dict[str, str]) -> None:
    points = [[i * 10.0, 1 - i / 1000] for i in range(300)]
    r = client.post("/api/v1/lamp-types", json={**T8, "lumen_points": points}, headers=writer)
    assert r.status_code == 422 and {e["field"] for e in r.json()["errors"]} == {"lumen_points"}
