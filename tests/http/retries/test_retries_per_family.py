"""Every write family retried with the same Idempotency-Key: the stored answer is replayed
(same status, same body, marked Idempotent-Replayed) and nothing is written twice: no new
row in any table and no version bumped a second time. A finished transition retried with
a new key answers the order as it is (200), recording nothing again."""

from __future__ import annotations

import itertools
from datetime import timedelta
from typing import Any

import pytest
from fastapi.testclient import TestClient
from sqlalchemy import func, select
from sqlalchemy.orm import Session

from service.db.base import Base, utcnow
from service.events import burnouts as events
from service.events.models import LampRemoval
from tests import factories as fx

_keys = itertools.count()
# The stored answers themselves (one row per key, written by the first request).
BOOKKEEPING = frozenset({"idempotency_keys"})


def snapshot(db: Session) -> dict[str, tuple[int, int]]:
    """Per table: row count and the sum of its versions (0 without a version column)."""
    db.expire_all()
    out: dict[str, tuple[int, int]] = {}
    for table in Base.metadata.sorted_tables:
        if table.name in BOOKKEEPING:
            continue
        n = int(db.scalar(select(func.count()).select_from(table)) or 0)
        v = 0
        if "version" in table.c:
            v = int(db.scalar(select(func.coalesce(func.sum(table.c.version), 0))) or 0)
        out[table.name] = (n, v)
    return out


def retried(
    client: TestClient, db: Session, h: dict[str, str], method: str, url: str, **kw: Any
) -> Any:
    """Send a request, then the same with the same key; check the replay; the first answer."""
    headers = {**h, **kw.pop("headers", {}), "Idempotency-Key": f"family-{next(_keys)}"}
    first = client.request(method, url, headers=headers, **kw)
    assert 200 <= first.status_code < 300, f"{method} {url}: {first.text}"
    assert first.headers.get("idempotent-replayed") is None
    before = snapshot(db)
    again = client.request(method, url, headers=headers, **kw)
    assert again.status_code == first.status_code, again.text
    assert again.headers.get("idempotent-replayed") == "true"
    assert again.content == first.content
    if "location" in first.headers:
        assert again.headers["location"] == first.headers["location"]
    assert snapshot(db) == before, f"{method} {url} wrote again on its retry"
    return first


def csv(header: list[str], row: list[str]) -> bytes:
    """A one-row CSV upload."""
    return (",".join(header) + "\n" + ",".join(row) + "\n").encode()


SITE: dict[str, Any] = {
    "name": "Family Depot",
    "time_zone": "Europe/Lisbon",
    "nominal_voltage_v": 230,
    "currency": "EUR",
    "energy_price_per_kwh": 0.2,
    "labour_rate_per_h": 40,
}


@pytest.fixture()
def world(db: Session) -> dict[str, Any]:
    """A site, area, lamp type and fixture to point at (committed)."""
    s = fx.site(db)
    a = fx.area(db, s)
    lt = fx.lamp_type(db)
    (f,) = fx.fixtures(db, a, lt)
    db.commit()
    return {"site": s, "area": a, "lamp_type": lt, "fixture": f}


def test_register_family(
    client: TestClient, db: Session, writer: dict[str, str], world: dict[str, Any]
) -> None:
    s, lt = world["site"], world["lamp_type"]
    site = retried(client, db, writer, "POST", "/api/v1/sites", json=SITE).json()
    retried(client, db, writer, "PATCH", f"/api/v1/sites/{site['id']}", json={"notes": "gate B"})
    area = retried(
        client, db, writer, "POST", "/api/v1/areas", json={"site_id": s.id, "name": "Yard"}
    ).json()
    body = {"area_id": area["id"], "tag": "FAM-1", "lamp_type_id": lt.id}
    fixture = retried(client, db, writer, "POST", "/api/v1/fixtures", json=body).json()
    retried(
        client,
        db,
        writer,
        "PATCH",
        f"/api/v1/fixtures/{fixture['id']}",
        json={"location": "north wall"},
    )
    upload = csv(
        ["site", "area", "tag", "lamp_type", "lamps_per_fixture", "lamps_installed_at"],
        [s.name, "Yard", "FAM-2", lt.code, "2", "2025-07-01T12:00:00Z"],
    )
    retried(
        client, db, writer, "POST", "/api/v1/fixtures/import",
        content=upload, headers={"content-type": "text/csv"},
    )  # fmt: skip
    retried(client, db, writer, "DELETE", f"/api/v1/fixtures/{fixture['id']}")
    empty = client.post("/api/v1/areas", json={"site_id": s.id, "name": "Spare"}, headers=writer)
    retried(client, db, writer, "DELETE", f"/api/v1/areas/{empty.json()['id']}")
    retried(client, db, writer, "POST", f"/api/v1/areas/{area['id']}/retire")


def test_catalogue_family(
    client: TestClient, db: Session, writer: dict[str, str], world: dict[str, Any]
) -> None:
    body = {
        "code": "FAM-LED",
        "technology": "led",
        "rated_watts": 10,
        "rated_volts": 230,
        "rated_life_h": 50_000,
    }
    lt = retried(client, db, writer, "POST", "/api/v1/lamp-types", json=body).json()
    retried(client, db, writer, "PATCH", f"/api/v1/lamp-types/{lt['id']}", json={"unit_price": 3})
    upload = csv(
        ["code", "technology", "rated_watts", "rated_volts", "rated_life_h"],
        ["FAM-CFL", "compact_fluorescent", "15", "230", "10000"],
    )
    retried(
        client, db, writer, "POST", "/api/v1/lamp-types/import",
        content=upload, headers={"content-type": "text/csv"},
    )  # fmt: skip


def test_readings_family(
    client: TestClient, db: Session, writer: dict[str, str], world: dict[str, Any]
) -> None:
    f = world["fixture"]
    hours = csv(
        ["fixture_id", "period_start", "period_end", "hours"],
        [str(f.id), "2025-07-01T06:00:00Z", "2025-07-01T12:00:00Z", "5"],
    )
    retried(
        client, db, writer, "POST", "/api/v1/burn-hours/bulk",
        content=hours, headers={"content-type": "text/csv"},
    )  # fmt: skip
    volts = csv(["fixture_id", "measured_at", "volts"], [str(f.id), "2025-07-02T12:00:00Z", "231"])
    retried(
        client, db, writer, "POST", "/api/v1/voltage-readings/bulk",
        content=volts, headers={"content-type": "text/csv"},
    )  # fmt: skip
    one = {"fixture_id": f.id, "measured_at": "2025-07-03T12:00:00Z", "volts": 229}
    retried(client, db, writer, "POST", "/api/v1/voltage-readings", json=one)


def test_burnout_family(
    client: TestClient, db: Session, writer: dict[str, str], world: dict[str, Any]
) -> None:
    positions = world["fixture"].positions
    at = (utcnow() - timedelta(days=1)).isoformat()
    report = {"position_id": positions[0].id, "reported_at": at}
    retried(client, db, writer, "POST", "/api/v1/burnout-reports", json=report)
    removal = {
        "position_id": positions[-1].id,
        "removed_at": at,
        "failed": False,
        "reason": "upgrade",
    }
    retried(client, db, writer, "POST", "/api/v1/lamp-removals", json=removal)


def test_work_order_family_and_finished_transition(
    client: TestClient, db: Session, writer: dict[str, str], world: dict[str, Any]
) -> None:
    area = world["area"]
    events.report_burnout(
        db, position_id=world["fixture"].positions[0].id, reported_at=utcnow() - timedelta(days=1)
    )
    db.commit()
    order = retried(
        client, db, writer, "POST", "/api/v1/work-orders",
        json={"area_id": area.id, "kind": "spot_replacement"},
    ).json()  # fmt: skip
    url = f"/api/v1/work-orders/{order['id']}"
    retried(client, db, writer, "PATCH", url, json={"notes": "bring the long ladder"})
    retried(client, db, writer, "POST", f"{url}/issue")
    retried(client, db, writer, "POST", f"{url}/start")
    done = retried(client, db, writer, "POST", f"{url}/complete", json={"others": "replaced"})
    assert done.json()["state"] == "done"
    removals = int(db.scalar(select(func.count()).select_from(LampRemoval)) or 0)
    # A finished transition sent again under a new key: the order as it is, nothing again.
    again = client.post(f"{url}/complete", json={"others": "replaced"}, headers=writer)
    assert again.status_code == 200, again.text
    assert again.json()["state"] == "done"
    assert again.json()["version"] == done.json()["version"]
    db.expire_all()
    assert int(db.scalar(select(func.count()).select_from(LampRemoval)) or 0) == removals
    # And a cancel of another order, retried.
    other = client.post(
        "/api/v1/work-orders", json={"area_id": area.id, "kind": "group_relamp"}, headers=writer
    )
    assert other.status_code == 201, other.text
    retried(client, db, writer, "POST", f"/api/v1/work-orders/{other.json()['id']}/cancel")


def test_weekly_run_and_keys_family(
    client: TestClient, db: Session, admin: dict[str, str], world: dict[str, Any]
) -> None:
    retried(client, db, admin, "POST", f"/api/v1/sites/{world['site'].id}/runs")
    key = retried(client, db, admin, "POST", "/api/v1/keys", json={"name": "cmms", "scope": "read"})
    retried(client, db, admin, "DELETE", f"/api/v1/keys/{key.json()['id']}")
