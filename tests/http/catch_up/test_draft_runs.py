"""A site set to drafts: its weekly run makes draft orders; a planner's issue reserves stock."""

from __future__ import annotations

from datetime import timedelta
from typing import Any

from fastapi.testclient import TestClient
from sqlalchemy import select
from sqlalchemy.orm import Session

from service.changes.models import Change
from service.db.base import utcnow
from service.stock.models import Storeroom, StoreroomSite
from tests import factories as fx

API = "/api/v1"


def _site(db: Session, **site_over: Any) -> dict[str, int]:
    """A site with one area of three two-lamp fixtures long due, its storeroom holding 10."""
    s = fx.site(db, name=f"Draft Works {utcnow().timestamp()}", **site_over)
    lt = fx.lamp_type(db, code=f"INC-D{s.id}")
    a = fx.area(db, s)
    fx.fixtures(db, a, lt, 3, lamps=2, installed_at=utcnow() - timedelta(weeks=20))
    room = Storeroom(name=f"Draft store {s.id}")
    db.add(room)
    db.flush()
    db.add(StoreroomSite(site_id=s.id, storeroom_id=room.id))
    db.commit()
    return {"site": s.id, "area": a.id, "lt": lt.id, "room": room.id}


def _stock(client: TestClient, h: dict[str, str], k: dict[str, int], qty: int) -> None:
    url = f"{API}/storerooms/{k['room']}/stock/{k['lt']}"
    assert client.put(url, json={"pack_size": 2}, headers=h).status_code in (200, 201)
    body = {"lamp_type_id": k["lt"], "kind": "received", "quantity": qty}
    r = client.post(f"{API}/storerooms/{k['room']}/movements", json=body, headers=h)
    assert r.status_code == 201, r.text


def _balance(client: TestClient, h: dict[str, str], k: dict[str, int]) -> dict[str, Any]:
    r = client.get(f"{API}/storerooms/{k['room']}/stock/{k['lt']}", headers=h)
    assert r.status_code == 200, r.text
    return dict(r.json())


def test_draft_site_run_makes_drafts_and_issuing_one_reserves_its_stock(
    client: TestClient, db: Session, writer: dict[str, str], reader: dict[str, str]
) -> None:
    k = _site(db, weekly_run_drafts=True)
    _stock(client, writer, k, 10)
    r = client.post(f"{API}/sites/{k['site']}/runs", json={"week": "2026-W49"}, headers=writer)
    assert r.status_code == 201, r.text
    assert r.json()["group_orders"] == 1
    (order,) = client.get(f"{API}/work-orders?site_id={k['site']}", headers=reader).json()["items"]
    assert order["state"] == "draft" and order["allowed_next"] == ["issued", "cancelled"]
    assert _balance(client, reader, k)["reserved"] == 0  # a draft reserves nothing
    oid = order["id"]
    assert client.post(f"{API}/work-orders/{oid}/issue", headers=reader).status_code == 403
    stale = client.post(f"{API}/work-orders/{oid}/issue", headers={**writer, "If-Match": '"99"'})
    assert stale.status_code == 412  # a version check: the planner saw another version
    r = client.post(f"{API}/work-orders/{oid}/issue", headers=writer)
    assert r.status_code == 200 and r.json()["state"] == "issued"
    bal = _balance(client, reader, k)
    assert (bal["reserved"], bal["available"]) == (6, 4)  # three fixtures x two lamps
    again = client.post(f"{API}/work-orders/{oid}/issue", headers=writer)  # a retried approve
    assert again.status_code == 200 and again.json()["version"] == r.json()["version"]
    assert _balance(client, reader, k)["reserved"] == 6  # reserved once
    # The change feed saw the order made as a draft and then issued.
    rows = db.execute(
        select(Change.kind, Change.version, Change.body)
        .where(Change.resource_type == "work_order", Change.resource_id == oid)
        .order_by(Change.id)
    ).all()
    states = [(kind, (body or {}).get("state")) for kind, _, body in rows]
    assert states[0] == ("created", "draft") and states[-1] == ("state_changed", "issued")


def test_site_not_set_to_drafts_issues_and_reserves_at_once(
    client: TestClient, db: Session, writer: dict[str, str], reader: dict[str, str]
) -> None:
    k = _site(db)
    _stock(client, writer, k, 10)
    r = client.post(f"{API}/sites/{k['site']}/runs", json={"week": "2026-W49"}, headers=writer)
    assert r.status_code == 201, r.text
    (order,) = client.get(f"{API}/work-orders?site_id={k['site']}", headers=reader).json()["items"]
    assert order["state"] == "issued"
    assert _balance(client, reader, k)["reserved"] == 6


def test_site_setting_round_trips(client: TestClient, db: Session, writer: dict[str, str]) -> None:
    k = _site(db)
    body = {"weekly_run_drafts": True, "weekly_labour_h_capacity": 32.5}
    r = client.patch(f"{API}/sites/{k['site']}", json=body, headers=writer)
    assert r.status_code == 200, r.text
    assert r.json()["weekly_run_drafts"] is True and r.json()["weekly_labour_h_capacity"] == 32.5
    bad = client.patch(
        f"{API}/sites/{k['site']}", json={"weekly_budget_capacity": -1}, headers=writer
    )
    assert bad.status_code == 422 and bad.json()["errors"][0]["field"] == "weekly_budget_capacity"
