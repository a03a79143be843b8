"""External references on sites, fixtures and work orders: lookups, uniqueness, 409s."""

from __future__ import annotations

from collections.abc import Callable
from typing import Any

import pytest
from fastapi.testclient import TestClient
from sqlalchemy.orm import Session

from tests.factories import plan_area, plan_fixtures, plan_lamp_type, plan_site

# (resource path, how to create one of it from a fresh area; returns its create body)
Maker = Callable[[Session], tuple[str, dict[str, Any]]]


def _site_body(db: Session) -> tuple[str, dict[str, Any]]:
    n = plan_site(db).id  # a number no other test site name uses
    return "sites", {
        "name": f"Lookup Works {n}",
        "time_zone": "Europe/Lisbon",
        "nominal_voltage_v": 230.0,
        "currency": "EUR",
        "energy_price_per_kwh": 0.2,
        "labour_rate_per_h": 40.0,
    }


def _fixture_body(db: Session) -> tuple[str, dict[str, Any]]:
    area = plan_area(db, plan_site(db))
    lt = plan_lamp_type(db)
    return "fixtures", {"tag": f"LK-{area.id}", "area_id": area.id, "lamp_type_id": lt.id}


def _order_body(db: Session) -> tuple[str, dict[str, Any]]:
    area = plan_area(db, plan_site(db))
    plan_fixtures(db, area, plan_lamp_type(db), 2)
    return "work-orders", {"area_id": area.id, "kind": "group_relamp"}


MAKERS = pytest.mark.parametrize("maker", [_site_body, _fixture_body, _order_body])


def _create(
    client: TestClient, db: Session, writer: dict[str, str], maker: Maker, ref: str | None
) -> Any:
    path, body = maker(db)
    db.commit()
    if ref is not None:
        body["external_reference"] = ref
    return path, client.post(f"/api/v1/{path}", json=body, headers=writer)


@MAKERS
def test_lookup_by_external_reference(
    client: TestClient, db: Session, writer: dict[str, str], maker: Maker
) -> None:
    path, made = _create(client, db, writer, maker, "CMMS-A-1")
    assert made.status_code == 201, made.text
    # Location names the new record; following it gives the same record back.
    again = client.get(made.headers["location"], headers=writer)
    assert again.status_code == 200 and again.json()["id"] == made.json()["id"]
    _create(client, db, writer, maker, None)  # another, without a reference
    found = client.get(f"/api/v1/{path}?external_reference=CMMS-A-1", headers=writer).json()
    assert [x["id"] for x in found["items"]] == [made.json()["id"]]
    assert found["items"][0]["external_reference"] == "CMMS-A-1"
    none = client.get(f"/api/v1/{path}?external_reference=CMMS-A-", headers=writer).json()
    assert none["items"] == [] and none["total"] == 0  # exact match, not a fragment


@MAKERS
def test_a_clash_is_a_409_naming_the_field(
    client: TestClient, db: Session, writer: dict[str, str], maker: Maker
) -> None:
    path, first = _create(client, db, writer, maker, "CMMS-DUP")
    assert first.status_code == 201, first.text
    _, second = _create(client, db, writer, maker, "CMMS-DUP")
    assert second.status_code == 409
    assert second.headers["content-type"] == "application/problem+json"
    assert second.json()["errors"][0]["field"] == "external_reference"
    # Setting a taken reference on another record by PATCH is refused the same way.
    _, other = _create(client, db, writer, maker, None)
    assert other.status_code == 201, other.text
    patch = client.patch(
        f"/api/v1/{path}/{other.json()['id']}",
        json={"external_reference": "CMMS-DUP"},
        headers=writer,
    )
    assert patch.status_code == 409 and patch.json()["errors"][0]["field"] == "external_reference"
    # A record may keep (resend) its own reference, and references may be cleared.
    own = client.patch(
        f"/api/v1/{path}/{first.json()['id']}",
        json={"external_reference": "CMMS-DUP"},
        headers=writer,
    )
    assert own.status_code == 200, own.text
    cleared = client.patch(
        f"/api/v1/{path}/{first.json()['id']}", json={"external_reference": None}, headers=writer
    )
    assert cleared.status_code == 200 and cleared.json()["external_reference"] is None
    # Many records without a reference never clash (NULLs are not equal).
    assert _create(client, db, writer, maker, None)[1].status_code == 201


@pytest.mark.parametrize(
    ("maker", "module"),
    [
        (_site_body, "service.register.sites"),
        (_fixture_body, "service.register.fixtures"),
        (_order_body, "service.workorders.service"),
    ],
)
def test_a_racing_duplicate_is_refused_by_the_index(
    client: TestClient,
    db: Session,
    writer: dict[str, str],
    monkeypatch: pytest.MonkeyPatch,
    maker: Maker,
    module: str,
) -> None:
    # Two requests at once both pass the read check (the other has not committed yet);
    # the unique index of migration 0014 decides: the second answers 409, writes nothing.
    monkeypatch.setattr(f"{module}.refuse_taken_reference", lambda *a, **k: None)
    path, first = _create(client, db, writer, maker, "CMMS-RACE")
    assert first.status_code == 201, first.text
    _, second = _create(client, db, writer, maker, "CMMS-RACE")
    assert second.status_code == 409
    assert second.headers["content-type"] == "application/problem+json"
    found = client.get(f"/api/v1/{path}?external_reference=CMMS-RACE", headers=writer).json()
    assert found["total"] == 1
