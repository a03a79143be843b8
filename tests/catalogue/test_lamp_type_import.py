"""Lamp type bulk import and export: CSV and JSON, all rows or none, round trip."""

from __future__ import annotations

import csv
import io
import json
from typing import Any

from fastapi.testclient import TestClient

from service.catalogue.schemas import LAMP_TYPE_FIELDS


def post(
    client: TestClient, headers: dict[str, str], body: str, kind: str = "text/csv", q: str = ""
) -> Any:
    """POST an upload to the lamp type import."""
    return client.post(
        f"/api/v1/lamp-types/import{q}",
        content=body.encode(),
        headers={**headers, "Content-Type": kind},
    )


CSV = (
    "code,technology,rated_watts,rated_volts,rated_life_h,weibull_shape,mortality_points,"
    "lumen_points,contains_mercury,driver_min_volts,driver_max_volts\n"
    'T5-28,linear_fluorescent,28,230,24000,,"[[50,95],[100,50],[125,20]]",,,,\n'
    'LED-40,led,40,230,50000,1.8,,"[[0,1],[25000,0.85]]",false,198,264\n'
    "GLS-60,incandescent,60,230,1000,,,,no,,\n"
)


def total(client: TestClient, headers: dict[str, str]) -> int:
    """Lamp types stored."""
    return int(client.get("/api/v1/lamp-types", headers=headers).json()["total"])


def test_csv_import_and_model(client: TestClient, writer: dict[str, str]) -> None:
    r = post(client, writer, CSV)
    assert r.status_code == 200, r.text
    assert r.json() == {"rows": 3, "created": 3, "updated": 0}
    items = {i["code"]: i for i in client.get("/api/v1/lamp-types", headers=writer).json()["items"]}
    assert items["T5-28"]["model"]["sources"]["shape"] == "fit"
    assert items["T5-28"]["contains_mercury"] is True  # technology default
    assert items["LED-40"]["model"]["shape"] == 1.8
    assert items["LED-40"]["lumen_points"] == [[0, 1], [25000, 0.85]]
    assert items["GLS-60"]["model"]["is_filament"] is True


def test_a_bad_row_saves_nothing_and_all_bad_rows_are_listed(
    client: TestClient, writer: dict[str, str]
) -> None:
    assert post(client, writer, CSV).status_code == 200
    before = total(client, writer)
    body = (
        "code,technology,rated_watts,rated_volts,rated_life_h,rated_percentile,weibull_shape,"
        "lumen_points\n"
        "OK-1,led,10,230,50000,,,\n"
        "BAD-TECH,plasma,10,230,50000,,,\n"  # line 3
        "BAD-PCT,led,10,230,50000,100,,\n"  # line 4
        "BAD-SHAPE,led,10,230,50000,,0,\n"  # line 5
        "BAD-VOLTS,led,10,0,50000,,,\n"  # line 6
        'BAD-LUMEN,led,10,230,50000,,,"[[0,1],[100,1.1]]"\n'  # line 7
        "BAD-JSON,led,10,230,50000,,,[[0\n"  # line 8
        "T5-28,led,10,230,50000,,,\n"  # line 9: exists already
    )
    r = post(client, writer, body)
    assert r.status_code == 422, r.text
    got = {(e["row"], e["field"]) for e in r.json()["errors"]}
    assert got == {
        (3, "technology"),
        (4, "rated_percentile"),
        (5, "weibull_shape"),
        (6, "rated_volts"),
        (7, "lumen_points"),
        (8, "lumen_points"),
        (9, "code"),
    }
    assert total(client, writer) == before


def test_duplicates_conflict_or_update(client: TestClient, writer: dict[str, str]) -> None:
    assert post(client, writer, CSV).status_code == 200
    r = post(client, writer, CSV)
    assert r.status_code == 409 and len(r.json()["errors"]) == 3
    changed = CSV.replace("T5-28,linear_fluorescent,28", "T5-28,linear_fluorescent,35")
    r = post(client, writer, changed, q="?on_duplicate=update")
    assert r.status_code == 200 and r.json() == {"rows": 3, "created": 0, "updated": 3}
    t5 = client.get("/api/v1/lamp-types?code=T5-28", headers=writer).json()["items"][0]
    assert t5["rated_watts"] == 35
    twice = CSV + "T5-28,linear_fluorescent,28,230,24000,,,,,,\n"
    r = post(client, writer, twice, q="?on_duplicate=update")
    assert r.status_code == 422 and r.json()["errors"][0]["row"] == 5


def test_export_round_trips(client: TestClient, writer: dict[str, str]) -> None:
    assert post(client, writer, CSV).status_code == 200
    exported = client.get("/api/v1/lamp-types/export", headers=writer)
    assert exported.status_code == 200
    header = next(csv.reader(io.StringIO(exported.text)))
    assert tuple(header) == LAMP_TYPE_FIELDS
    as_json = client.get("/api/v1/lamp-types/export?format=json", headers=writer).json()
    assert [r["code"] for r in as_json] == ["GLS-60", "LED-40", "T5-28"]
    led = client.get("/api/v1/lamp-types/export?format=json&technology=led", headers=writer)
    assert [r["code"] for r in led.json()] == ["LED-40"]
    for item in client.get("/api/v1/lamp-types", headers=writer).json()["items"]:
        assert client.delete(f"/api/v1/lamp-types/{item['id']}", headers=writer).status_code == 204
    assert post(client, writer, exported.text).status_code == 200
    assert client.get("/api/v1/lamp-types/export", headers=writer).text == exported.text
    r = post(client, writer, json.dumps(as_json), "application/json", q="?on_duplicate=update")
    assert r.status_code == 200 and r.json()["updated"] == 3
    assert client.get("/api/v1/lamp-types/export?format=json", headers=writer).json() == as_json
