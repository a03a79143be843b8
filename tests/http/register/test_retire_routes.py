"""Retiring sites, areas, fixtures and lamp types: kept, hidden from lists, idempotent."""

from __future__ import annotations

from datetime import timedelta

from fastapi.testclient import TestClient
from sqlalchemy import select
from sqlalchemy.orm import Session

from service.register.models import LampPosition
from tests import factories as fx


def _ids(client: TestClient, path: str, headers: dict[str, str], **params: object) -> set[int]:
    r = client.get(path, params={"limit": 200, **params}, headers=headers)
    assert r.status_code == 200, r.text
    return {item["id"] for item in r.json()["items"]}


def test_retire_site_hides_it_and_its_contents(
    db: Session, client: TestClient, writer: dict[str, str]
) -> None:
    s = fx.site(db)
    a = fx.area(db, s)
    lt = fx.lamp_type(db)
    (f,) = fx.fixtures(db, a, lt, 1)
    db.commit()
    r = client.post(f"/api/v1/sites/{s.id}/retire", headers=writer)
    assert r.status_code == 200, r.text
    retired_at = r.json()["retired_at"]
    assert retired_at is not None
    for path, rid in (("/sites", s.id), ("/areas", a.id), ("/fixtures", f.id)):
        assert rid not in _ids(client, f"/api/v1{path}", writer)
        assert rid in _ids(client, f"/api/v1{path}", writer, include_retired="true")
        one = client.get(f"/api/v1{path}/{rid}", headers=writer)
        assert one.status_code == 200 and one.json()["retired_at"] == retired_at
    # A repeat answers the same record, retired_at and version unchanged.
    again = client.post(f"/api/v1/sites/{s.id}/retire", headers=writer)
    assert again.status_code == 200
    assert again.json()["retired_at"] == retired_at
    assert again.json()["version"] == r.json()["version"]


def test_retire_lamp_type_hides_it_from_the_list(
    db: Session, client: TestClient, writer: dict[str, str]
) -> None:
    lt = fx.lamp_type(db)
    db.commit()
    r = client.post(f"/api/v1/lamp-types/{lt.id}/retire", headers=writer)
    assert r.status_code == 200, r.text
    assert r.json()["retired_at"] is not None
    assert lt.id not in _ids(client, "/api/v1/lamp-types", writer)
    assert lt.id in _ids(client, "/api/v1/lamp-types", writer, include_retired="true")
    again = client.post(f"/api/v1/lamp-types/{lt.id}/retire", headers=writer)
    assert again.json()["retired_at"] == r.json()["retired_at"]


def test_retire_needs_write_scope(db: Session, client: TestClient, make_key: object) -> None:
    s = fx.site(db)
    db.commit()
    reader = make_key("read")  # type: ignore[operator]
    assert client.post(f"/api/v1/sites/{s.id}/retire", headers=reader).status_code == 403
    assert client.post("/api/v1/sites/999999/retire", headers=make_key("write")).status_code == 404  # type: ignore[operator]


def test_nothing_new_under_a_retired_record(
    db: Session, client: TestClient, writer: dict[str, str]
) -> None:
    s = fx.site(db)
    a = fx.area(db, s)
    lt = fx.lamp_type(db)
    (f,) = fx.fixtures(db, a, lt, 1)
    db.commit()
    pos = db.scalars(select(LampPosition).where(LampPosition.fixture_id == f.id)).one()
    assert client.post(f"/api/v1/areas/{a.id}/retire", headers=writer).status_code == 200
    body = {"area_id": a.id, "tag": "NEW-1", "lamp_type_id": lt.id}
    r = client.post("/api/v1/fixtures", json=body, headers=writer)
    assert r.status_code == 409, r.text
    r = client.post(
        "/api/v1/burnout-reports",
        json={"position_id": pos.id, "reported_at": (fx.T0 + timedelta(days=10)).isoformat()},
        headers=writer,
    )
    assert r.status_code == 409, r.text
    r = client.post(
        "/api/v1/burn-hours",
        json={
            "fixture_id": f.id,
            "read_at": (fx.T0 + timedelta(days=5)).isoformat(),
            "counter_hours": 50,
        },
        headers=writer,
    )
    assert r.status_code == 409, r.text
    assert "retired" in r.text
    r = client.post(
        "/api/v1/areas",
        json={"site_id": s.id, "name": "Annex"},
        headers=writer,
    )
    assert r.status_code == 201, r.text  # the site itself is not retired
    assert client.post(f"/api/v1/sites/{s.id}/retire", headers=writer).status_code == 200
    r = client.post("/api/v1/areas", json={"site_id": s.id, "name": "Annex 2"}, headers=writer)
    assert r.status_code == 409, r.text


def test_retire_fixture_on_open_order_is_409(
    db: Session, client: TestClient, writer: dict[str, str]
) -> None:
    from tests.service.register.test_retire_rules import _open_order

    s = fx.site(db)
    a = fx.area(db, s)
    lt = fx.lamp_type(db)
    (f,) = fx.fixtures(db, a, lt, 1)
    order = _open_order(db, f)
    db.commit()
    r = client.post(f"/api/v1/fixtures/{f.id}/retire", headers=writer)
    assert r.status_code == 409, r.text
    assert r.headers["content-type"].startswith("application/problem+json")
    assert r.json()["work_orders"] == [order.id]
    assert client.get(f"/api/v1/fixtures/{f.id}", headers=writer).json()["retired_at"] is None
