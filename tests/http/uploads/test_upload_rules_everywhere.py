"""The same bad uploads through every bulk endpoint get the same answer and store nothing.

Endpoints: POST /fixtures/import, /lamp-types/import, /burn-hours/bulk, /voltage-readings/bulk.
Each case is parametrised across the endpoints that have the kind of column it needs.
"""

from __future__ import annotations

import json
from dataclasses import dataclass
from datetime import UTC, datetime
from typing import Any

import pytest
from fastapi.testclient import TestClient
from sqlalchemy import func, select
from sqlalchemy.orm import Session

from service.catalogue.models import LampType
from service.readings.models import BurnHourRecord, VoltageReading
from service.register.models import Fixture, LampPosition
from tests import factories as fx

ZONE = "Europe/Lisbon"  # UTC+1 in summer: a naive 12:00 there is 11:00 UTC


@dataclass(frozen=True)
class Endpoint:
    """An endpoint, a good row for it, and which of its columns hold what kind of cell."""

    url: str
    good: dict[str, str]  # column -> cell of a row that stores
    number: str
    boolean: str | None = None
    timestamp: str | None = None  # a column whose naive time the rule reads
    naive_zone: str | None = None  # what that rule reads it in (None: UTC)
    ok: int = 201


def _endpoints(db: Session) -> dict[str, Endpoint]:
    s = fx.site(db, time_zone=ZONE)
    a = fx.area(db, s)
    lt = fx.lamp_type(db)
    (f,) = fx.fixtures(db, a, lt)
    db.commit()
    return {
        "fixtures": Endpoint(
            "/api/v1/fixtures/import",
            {
                "site": s.name,
                "area": a.name,
                "tag": "NEW-1",
                "lamp_type": lt.code,
                "lamps_per_fixture": "2",
                "lamps_installed_at": "2025-07-01T12:00:00Z",
            },
            number="lamps_per_fixture",
            timestamp="lamps_installed_at",
            ok=200,
        ),
        "lamp-types": Endpoint(
            "/api/v1/lamp-types/import",
            {
                "code": "NEW-LED",
                "technology": "led",
                "rated_watts": "10",
                "rated_volts": "230",
                "rated_life_h": "50000",
                "contains_mercury": "no",
            },
            number="rated_watts",
            boolean="contains_mercury",
            ok=200,
        ),
        "burn-hours": Endpoint(
            "/api/v1/burn-hours/bulk",
            {
                "fixture_id": str(f.id),
                "period_start": "2025-07-01T06:00:00Z",
                "period_end": "2025-07-01T12:00:00Z",
                "hours": "5",
                "counter_reset": "false",
            },
            number="hours",
            boolean="counter_reset",
            timestamp="period_end",
            naive_zone=ZONE,
        ),
        "voltages": Endpoint(
            "/api/v1/voltage-readings/bulk",
            {"fixture_id": str(f.id), "measured_at": "2025-07-01T12:00:00Z", "volts": "231"},
            number="volts",
            timestamp="measured_at",
            naive_zone=ZONE,
        ),
    }


ALL = ["fixtures", "lamp-types", "burn-hours", "voltages"]
WITH_BOOLEAN = ["lamp-types", "burn-hours"]
WITH_TIMESTAMP = ["fixtures", "burn-hours", "voltages"]


def counts(db: Session) -> tuple[int, ...]:
    """Rows in the tables the bulk endpoints write."""
    tables = (Fixture, LampPosition, LampType, BurnHourRecord, VoltageReading)
    return tuple(int(db.scalar(select(func.count()).select_from(t)) or 0) for t in tables)


def csv_body(header: list[str], *rows: list[str]) -> bytes:
    """CSV text: a header line and rows (cells joined as given, no quoting needed here)."""
    return ("\n".join(",".join(r) for r in [header, *rows]) + "\n").encode()


def post(client: TestClient, writer: dict[str, str], url: str, body: bytes, media: str) -> Any:
    """POST an upload."""
    return client.post(url, content=body, headers={**writer, "content-type": media})


def refused(r: Any, status: int = 422) -> dict[str, Any]:
    """The problem+json body of a refused upload."""
    assert r.status_code == status, r.text
    assert r.headers["content-type"].startswith("application/problem+json")
    body: dict[str, Any] = r.json()
    return body


@pytest.fixture()
def eps(db: Session) -> dict[str, Endpoint]:
    """The four endpoints with a site, area, lamp type and fixture to point at."""
    return _endpoints(db)


@pytest.mark.parametrize("name", ALL)
@pytest.mark.parametrize("delta", [-1, 1], ids=["short-row", "ragged-row"])
def test_short_and_long_rows_are_refused_naming_the_row(
    client: TestClient,
    db: Session,
    writer: dict[str, str],
    eps: dict[str, Endpoint],
    name: str,
    delta: int,
) -> None:
    ep = eps[name]
    header = list(ep.good)
    cells = list(ep.good.values())
    bad = cells[:-1] if delta < 0 else [*cells, "extra"]
    before = counts(db)
    body = refused(post(client, writer, ep.url, csv_body(header, cells, bad), "text/csv"))
    assert body["errors"] == [
        {
            "row": 3,
            "field": None,
            "in": "body",
            "message": f"the row has {len(bad)} cells but the header has {len(header)} columns",
        }
    ]
    assert body["detail"] == "The CSV upload has 1 error(s) in 1 row(s); nothing was saved."
    assert counts(db) == before


@pytest.mark.parametrize("name", ALL)
@pytest.mark.parametrize("media", ["text/csv", "application/json"])
def test_a_bad_number_names_row_and_column(
    client: TestClient,
    db: Session,
    writer: dict[str, str],
    eps: dict[str, Endpoint],
    name: str,
    media: str,
) -> None:
    ep = eps[name]
    bad = {**ep.good, ep.number: "abc"}
    if media == "text/csv":
        data = csv_body(list(ep.good), list(ep.good.values()), list(bad.values()))
    else:
        data = json.dumps([ep.good, bad]).encode()
    row = 3 if media == "text/csv" else 2
    before = counts(db)
    body = refused(post(client, writer, ep.url, data, media))
    assert {
        "row": row,
        "field": ep.number,
        "in": "body",
        "message": "must be a number, not 'abc'",
    } in body["errors"]
    assert counts(db) == before


@pytest.mark.parametrize("name", WITH_BOOLEAN)
@pytest.mark.parametrize("cell", ["maybe", "2", "oui"])
def test_a_bad_boolean_has_one_wording(
    client: TestClient,
    db: Session,
    writer: dict[str, str],
    eps: dict[str, Endpoint],
    name: str,
    cell: str,
) -> None:
    ep = eps[name]
    assert ep.boolean is not None
    bad = {**ep.good, ep.boolean: cell}
    before = counts(db)
    data = csv_body(list(ep.good), list(bad.values()))
    body = refused(post(client, writer, ep.url, data, "text/csv"))
    assert body["errors"] == [
        {"row": 2, "field": ep.boolean, "in": "body", "message": "must be true or false"}
    ]
    assert counts(db) == before


@pytest.mark.parametrize("name", WITH_BOOLEAN)
@pytest.mark.parametrize(
    ("cell", "value"), [("YES", True), ("n", False), ("1", True), ("F", False)]
)
def test_boolean_words_read_alike(
    client: TestClient,
    db: Session,
    writer: dict[str, str],
    eps: dict[str, Endpoint],
    name: str,
    cell: str,
    value: bool,
) -> None:
    ep = eps[name]
    assert ep.boolean is not None
    data = csv_body(list(ep.good), list({**ep.good, ep.boolean: cell}.values()))
    assert post(client, writer, ep.url, data, "text/csv").status_code == ep.ok
    model: Any = LampType if name == "lamp-types" else BurnHourRecord
    stored = db.scalars(select(getattr(model, ep.boolean)).order_by(model.id.desc())).first()
    if name == "lamp-types" and value is False:
        assert stored is False
    else:
        assert stored is value


def _stored_time(db: Session, name: str) -> datetime:
    if name == "fixtures":
        got = db.scalar(
            select(LampPosition.lamp_installed_at)
            .join(Fixture, Fixture.id == LampPosition.fixture_id)
            .where(Fixture.tag == "NEW-1")
        )
    elif name == "burn-hours":
        got = db.scalar(select(BurnHourRecord.period_end))
    else:
        got = db.scalar(select(VoltageReading.measured_at))
    assert got is not None
    return got


@pytest.mark.parametrize("name", WITH_TIMESTAMP)
@pytest.mark.parametrize("media", ["text/csv", "application/json"])
def test_naive_time_rule(
    client: TestClient,
    db: Session,
    writer: dict[str, str],
    eps: dict[str, Endpoint],
    name: str,
    media: str,
) -> None:
    # Readings: the site's wall-clock time (their API documents it); the fixture import,
    # like POST /fixtures: UTC. Europe/Lisbon keeps UTC+1 in July (IANA tz database).
    ep = eps[name]
    assert ep.timestamp is not None
    row = {**ep.good, ep.timestamp: "2025-07-01T12:00:00"}
    if media == "text/csv":
        data = csv_body(list(row), list(row.values()))
    else:
        data = json.dumps([row]).encode()
    r = post(client, writer, ep.url, data, media)
    assert r.status_code == ep.ok, r.text
    expected = datetime(2025, 7, 1, 11 if ep.naive_zone else 12, tzinfo=UTC)
    assert _stored_time(db, name) == expected


@pytest.mark.parametrize("name", ["burn-hours", "voltages"])
def test_a_local_time_the_clocks_skip_is_refused(
    client: TestClient, db: Session, writer: dict[str, str], eps: dict[str, Endpoint], name: str
) -> None:
    ep = eps[name]
    assert ep.timestamp is not None
    # Lisbon goes from 01:00 to 02:00 on 2025-03-30 (EU summer time rule).
    row = {**ep.good, ep.timestamp: "2025-03-30T01:30:00"}
    if name == "burn-hours":
        row["period_start"] = "2025-03-30T00:00:00Z"
    before = counts(db)
    body = refused(
        post(client, writer, ep.url, csv_body(list(row), list(row.values())), "text/csv")
    )
    assert body["errors"] == [
        {
            "row": 2,
            "field": ep.timestamp,
            "in": "body",
            "message": "2025-03-30T01:30:00 does not exist in Europe/Lisbon (the clocks skip it); "
            "give a UTC offset",
        }
    ]
    assert counts(db) == before


def test_single_and_bulk_voltage_paths_agree(
    client: TestClient, db: Session, writer: dict[str, str], eps: dict[str, Endpoint]
) -> None:
    ep = eps["voltages"]
    one = {
        "fixture_id": int(ep.good["fixture_id"]),
        "measured_at": "2025-07-01T12:00:00",
        "volts": 230,
    }
    assert client.post("/api/v1/voltage-readings", json=one, headers=writer).status_code == 201
    assert (
        client.post(
            ep.url, json=[{**one, "measured_at": "2025-07-02T12:00:00"}], headers=writer
        ).status_code
        == 201
    )
    got = db.scalars(select(VoltageReading.measured_at).order_by(VoltageReading.id)).all()
    assert [t.hour for t in got] == [11, 11]


@pytest.mark.parametrize("name", ALL)
@pytest.mark.parametrize("media", ["text/csv", "application/json"])
def test_a_byte_order_mark_is_dropped(
    client: TestClient,
    db: Session,
    writer: dict[str, str],
    eps: dict[str, Endpoint],
    name: str,
    media: str,
) -> None:
    ep = eps[name]
    if media == "text/csv":
        data = csv_body(list(ep.good), list(ep.good.values()))
    else:
        data = json.dumps([ep.good]).encode()
    before = counts(db)
    r = post(client, writer, ep.url, "\ufeff".encode() + data, media)
    assert r.status_code == ep.ok, r.text
    assert sum(counts(db)) > sum(before)


@pytest.mark.parametrize("name", ALL)
@pytest.mark.parametrize("media", ["application/xml", "image/png", ""])
def test_wrong_media_type_is_415(
    client: TestClient,
    db: Session,
    writer: dict[str, str],
    eps: dict[str, Endpoint],
    name: str,
    media: str,
) -> None:
    ep = eps[name]
    before = counts(db)
    body = refused(post(client, writer, ep.url, b"a,b\n1,2\n", media), 415)
    shown = media or "nothing"
    assert body["detail"] == f"Send the rows as text/csv or application/json, not '{shown}'."
    assert counts(db) == before


@pytest.mark.parametrize("name", ALL)
@pytest.mark.parametrize(
    ("media", "data", "detail"),
    [
        ("text/csv", b"", "The CSV upload is empty: give a header line and rows."),
        ("text/csv", b"\xef\xbb\xbf \n", "The CSV upload is empty: give a header line and rows."),
        ("application/json", b"", "The JSON upload is empty: give a list of objects."),
    ],
)
def test_empty_upload_is_422(
    client: TestClient,
    db: Session,
    writer: dict[str, str],
    eps: dict[str, Endpoint],
    name: str,
    media: str,
    data: bytes,
    detail: str,
) -> None:
    ep = eps[name]
    before = counts(db)
    body = refused(post(client, writer, ep.url, data, media))
    assert body["detail"] == detail
    assert counts(db) == before


@pytest.mark.parametrize("name", ALL)
def test_header_only_and_empty_list_store_nothing(
    client: TestClient, db: Session, writer: dict[str, str], eps: dict[str, Endpoint], name: str
) -> None:
    ep = eps[name]
    before = counts(db)
    assert post(client, writer, ep.url, csv_body(list(ep.good)), "text/csv").status_code == ep.ok
    assert post(client, writer, ep.url, b"[]", "application/json").status_code == ep.ok
    assert counts(db) == before


@pytest.mark.parametrize("name", ALL)
def test_row_limit_is_413(
    client: TestClient,
    db: Session,
    writer: dict[str, str],
    eps: dict[str, Endpoint],
    name: str,
    monkeypatch: pytest.MonkeyPatch,
) -> None:
    from service.config import get_settings

    monkeypatch.setattr(get_settings(), "max_bulk_rows", 2)
    ep = eps[name]
    cells = list(ep.good.values())
    before = counts(db)
    body = refused(
        post(client, writer, ep.url, csv_body(list(ep.good), cells, cells, cells), "text/csv"), 413
    )
    assert body["detail"] == "The upload has 3 rows; at most 2 are accepted at once."
    assert counts(db) == before


@pytest.mark.parametrize("name", ALL)
def test_a_bad_last_row_of_many_stores_nothing(
    client: TestClient, db: Session, writer: dict[str, str], eps: dict[str, Endpoint], name: str
) -> None:
    ep = eps[name]
    good = list(ep.good.values())
    bad = list({**ep.good, ep.number: "-1e999"}.values())
    before = counts(db)
    body = refused(post(client, writer, ep.url, csv_body(list(ep.good), good, bad), "text/csv"))
    assert body["errors"][-1] == {
        "row": 3,
        "field": ep.number,
        "in": "body",
        "message": "must be a finite number",
    }
    assert counts(db) == before
