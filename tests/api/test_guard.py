"""Unknown query parameters and NUL characters are refused before any route runs.

Found by hand: ?site=3 (for ?site_id=3) silently returned every site's fixtures; a NUL
in a name or a query filter was stored on SQLite and made PostgreSQL's driver fail (500).
"""

from __future__ import annotations

import pytest
from fastapi.testclient import TestClient
from sqlalchemy.orm import Session

from tests.api.test_bad_input_tour import SITE, assert_problem, error_fields, table_counts


@pytest.mark.parametrize(
    ("url", "unknown"),
    [
        ("/api/v1/fixtures?site=3", {"site"}),
        ("/api/v1/sites?limit=5&foo=1&bar=", {"foo", "bar"}),
        ("/api/v1/forecasts/curve?lamp_type_id=1&volts=230", {"volts"}),
        ("/api/v1/areas/1/relamp-plan?horizon=4", {"horizon"}),
        ("/api/v1/work-orders?since=2026-01-01T00:00:00Z", {"since"}),
    ],
)
def test_unknown_query_parameters(
    client: TestClient, reader: dict[str, str], url: str, unknown: set[str]
) -> None:
    body = assert_problem(client.get(url, headers=reader), 422)
    assert error_fields(body) == unknown
    assert {e["in"] for e in body["errors"]} == {"query"}


def test_known_parameters_of_route_and_dependencies_pass(
    client: TestClient, reader: dict[str, str]
) -> None:
    # limit/offset/sort come from the page dependency, site_id from the route itself.
    r = client.get("/api/v1/fixtures?site_id=1&limit=5&offset=0&sort=tag", headers=reader)
    assert r.status_code == 200, r.text


@pytest.mark.parametrize(
    ("method", "url", "payload", "field"),
    [
        ("POST", "/api/v1/sites", {**SITE, "name": "a\x00b"}, "name"),
        (
            "POST",
            "/api/v1/sites",
            {**SITE, "notes": "ok", "name": "N", "currency": "E\x00R"},
            "currency",
        ),
        (
            "POST",
            "/api/v1/voltage-readings/bulk",
            [{"fixture_id": 1, "volts": 230}, {"fixture_id": 1, "note": "x\x00"}],
            "1.note",
        ),
        ("POST", "/api/v1/lamp-types/import", [{"co\x00de": "X"}], "0.co\x00de"),
    ],
)
def test_nul_in_a_json_body(
    client: TestClient,
    db: Session,
    writer: dict[str, str],
    method: str,
    url: str,
    payload: object,
    field: str,
) -> None:
    before = table_counts(db)
    body = assert_problem(client.request(method, url, json=payload, headers=writer), 422)
    assert error_fields(body) == {field}
    assert table_counts(db) == before


def test_nul_in_a_csv_body_and_a_query(
    client: TestClient, db: Session, writer: dict[str, str]
) -> None:
    before = table_counts(db)
    csv = b"fixture_id,measured_at,volts,note\n1,2026-01-01T00:00:00Z,230,a\x00b\n"
    r = client.post(
        "/api/v1/voltage-readings/bulk",
        content=csv,
        headers={**writer, "content-type": "text/csv"},
    )
    body = assert_problem(r, 422)
    assert body["errors"][0]["row"] == 2
    assert error_fields(
        assert_problem(client.get("/api/v1/sites?name=%00", headers=writer), 422)
    ) == {"name"}
    assert table_counts(db) == before


def test_escaped_backslash_is_not_a_nul(client: TestClient, writer: dict[str, str]) -> None:
    # JSON "\\u0000" is a backslash and the text u0000, which any database stores.
    r = client.post("/api/v1/sites", json={**SITE, "notes": "\\u0000"}, headers=writer)
    assert r.status_code == 201 and r.json()["notes"] == "\\u0000"


@pytest.mark.parametrize("literal", ["NaN", "Infinity", "-Infinity", "1e400", "-1E+400"])
def test_non_finite_json_numbers(
    client: TestClient, db: Session, writer: dict[str, str], literal: str
) -> None:
    # Found by fuzzing: Python's JSON parser reads these, and the relamp-plan overrides
    # (no allow_inf_nan=False there) passed an infinite labour rate to the core (a 500).
    site = client.post("/api/v1/sites", json=SITE, headers=writer).json()
    area = client.post(
        "/api/v1/areas", json={"site_id": site["id"], "name": "Hall"}, headers=writer
    ).json()
    before = table_counts(db)
    for url, raw, field in [
        (
            f"/api/v1/areas/{area['id']}/relamp-plan",
            f'{{"labour_rate_per_h": {literal}}}',
            "labour_rate_per_h",
        ),
        ("/api/v1/voltage-readings/bulk", f'[{{"volts": 230}}, {{"volts": {literal}}}]', "1.volts"),
    ]:
        r = client.post(
            url, content=raw.encode(), headers={**writer, "content-type": "application/json"}
        )
        assert error_fields(assert_problem(r, 422)) == {field}, r.text
    assert table_counts(db) == before


def test_finite_numbers_and_such_text_pass(client: TestClient, writer: dict[str, str]) -> None:
    raw = dict(SITE, name="NaN Infinity 1e400", labour_rate_per_h=1e300)
    r = client.post("/api/v1/sites", json=raw, headers=writer)
    assert r.status_code == 422  # 1e300 breaks the site's own price cap, not the guard
    assert error_fields(r.json()) == {"labour_rate_per_h"}
    r = client.post("/api/v1/sites", json={**raw, "labour_rate_per_h": 1e-400}, headers=writer)
    assert r.status_code == 201 and r.json()["name"] == "NaN Infinity 1e400"
