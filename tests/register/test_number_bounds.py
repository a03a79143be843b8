"""Register numbers a client may send wrong: NaN, Infinity, 1e400, near-zero volts.

Found by fuzzing and by hand: a site price of 1e400 (read as inf by the JSON parser) was
accepted and stored, and a supply of 5e-324 V was accepted and broke every forecast.
"""

from __future__ import annotations

from typing import Any

import pytest
from fastapi.testclient import TestClient
from sqlalchemy.orm import Session

from tests.api.test_bad_input_tour import assert_problem, error_fields, table_counts
from tests.factories import SITE, api_fixture, api_world


def _raw_post(client: TestClient, path: str, raw: str, headers: dict[str, str]) -> Any:
    return client.post(
        path, content=raw.encode(), headers={**headers, "content-type": "application/json"}
    )


@pytest.mark.parametrize(
    ("field", "literal"),
    [
        ("energy_price_per_kwh", "1e400"),
        ("labour_rate_per_h", "Infinity"),
        ("disposal_fee_per_mercury_lamp", "NaN"),
        ("labour_rate_per_h", "1e300"),
        ("nominal_voltage_v", "5e-324"),
        ("nominal_voltage_v", "0.5"),
        ("nominal_voltage_v", "-Infinity"),
    ],
)
def test_site_numbers(
    client: TestClient, db: Session, writer: dict[str, str], field: str, literal: str
) -> None:
    before = table_counts(db)
    fields = [f'"{k}": {v!r}'.replace("'", '"') for k, v in SITE.items() if k != field]
    raw = "{" + ", ".join([*fields, f'"{field}": {literal}']) + "}"
    body = assert_problem(_raw_post(client, "/api/v1/sites", raw, writer), 422)
    assert error_fields(body) == {field}
    assert table_counts(db) == before


def test_fixture_numbers(client: TestClient, db: Session, writer: dict[str, str]) -> None:
    w = api_world(client, writer)
    base = {"area_id": w["hall"]["id"], "lamp_type_id": w["t8"]["id"], "tag": "F-9"}
    before = table_counts(db)
    for over, field in [
        ({"measured_voltage_v": 5e-324}, "measured_voltage_v"),
        ({"lamp_starts_at_install": 1e300}, "lamp_starts_at_install"),
        ({"lamp_hours_at_install": 1e7}, "lamp_hours_at_install"),
        ({"lamps_per_fixture": 2**63}, "lamps_per_fixture"),
        ({"lamps_per_fixture": "2"}, None),  # a numeric string is coerced, like a CSV cell
    ]:
        r = client.post("/api/v1/fixtures", json={**base, **over}, headers=writer)
        if field is None:
            assert r.status_code == 201, r.text
            client.delete(f"/api/v1/fixtures/{r.json()['id']}", headers=writer)
            before = table_counts(db)  # that create and delete are in the change feed
            continue
        assert error_fields(assert_problem(r, 422)) == {field}
    assert table_counts(db) == before
    f = api_fixture(client, writer, w["hall"]["id"], w["t8"]["id"])
    pos = f["positions"][0]["id"]
    r = client.patch(f"/api/v1/positions/{pos}", json={"starts_at_install": 1e300}, headers=writer)
    assert error_fields(assert_problem(r, 422)) == {"starts_at_install"}


def test_fixture_csv_volts_and_starts(
    client: TestClient, db: Session, writer: dict[str, str]
) -> None:
    w = api_world(client, writer)
    head = "site,area,tag,lamp_type,measured_voltage_v,lamp_starts_at_install\n"
    row = f"{w['site']['name']},{w['hall']['name']},{{tag}},{w['t8']['code']},{{v}},{{s}}\n"
    csv = (
        head
        + row.format(tag="OK-1", v=230, s=10)
        + row.format(tag="BAD-1", v=0.5, s=10)
        + row.format(tag="BAD-2", v=230, s=1e300)
    )
    before = table_counts(db)
    r = client.post(
        "/api/v1/fixtures/import",
        content=csv.encode(),
        headers={**writer, "content-type": "text/csv"},
    )
    body = assert_problem(r, 422)
    got = {(e["row"], e["field"]) for e in body["errors"]}
    assert got == {(3, "measured_voltage_v"), (4, "lamp_starts_at_install")}, body
    assert table_counts(db) == before


def test_site_patch_null_names_the_field(client: TestClient, writer: dict[str, str]) -> None:
    # Found by hand: {"name": null} reached the NOT NULL column and came back as a 409
    # "clash"; it is a bad value of that field.
    site = client.post("/api/v1/sites", json=SITE, headers=writer).json()
    for field in ("name", "time_zone", "nominal_voltage_v", "currency", "lookahead_weeks"):
        r = client.patch(f"/api/v1/sites/{site['id']}", json={field: None}, headers=writer)
        assert error_fields(assert_problem(r, 422)) == {field}
    r = client.patch(f"/api/v1/sites/{site['id']}", json={"notes": None}, headers=writer)
    assert r.status_code == 200 and r.json()["name"] == SITE["name"]
