"""The stock ledger and the work-order hooks: reserve on issue, issue on completion, release."""

from __future__ import annotations

from datetime import timedelta
from typing import Any

import pytest
from fastapi.testclient import TestClient
from sqlalchemy import select
from sqlalchemy.orm import Session

from service.api.errors import Conflict
from service.db.base import utcnow
from service.stock import ledger
from service.stock.models import StockMovement, Storeroom, StoreroomSite
from tests.factories import plan_area, plan_fixtures, plan_lamp_type, plan_site

API = "/api/v1"


def _setup(db: Session, n: int = 3, stock: int = 10) -> dict[str, Any]:
    """A site with one area of n two-lamp fixtures, its storeroom stocking the lamp type."""
    s = plan_site(db)
    lt = plan_lamp_type(db)
    a = plan_area(db, s)
    fx = plan_fixtures(db, a, lt, n, lamps=2, installed_at=utcnow() - timedelta(weeks=20))
    room = Storeroom(name=f"Store {s.id}")
    db.add(room)
    db.flush()
    db.add(StoreroomSite(site_id=s.id, storeroom_id=room.id))
    db.commit()
    return {"site": s.id, "area": a.id, "lt": lt.id, "room": room.id, "fixtures": fx, "n": n}


def _stock(client: TestClient, h: dict[str, str], room: int, lt: int, qty: int) -> None:
    r = client.put(f"{API}/storerooms/{room}/stock/{lt}", json={"pack_size": 4}, headers=h)
    assert r.status_code in (200, 201), r.text
    if qty:
        body = {"lamp_type_id": lt, "kind": "received", "quantity": qty}
        r = client.post(f"{API}/storerooms/{room}/movements", json=body, headers=h)
        assert r.status_code == 201, r.text


def _balance(client: TestClient, h: dict[str, str], room: int, lt: int) -> dict[str, Any]:
    r = client.get(f"{API}/storerooms/{room}/stock/{lt}", headers=h)
    assert r.status_code == 200, r.text
    return dict(r.json())


def _order(client: TestClient, h: dict[str, str], area: int) -> int:
    r = client.post(f"{API}/work-orders", json={"area_id": area, "kind": "group_relamp"}, headers=h)
    assert r.status_code == 201, r.text
    return int(r.json()["id"])


def _post(client: TestClient, h: dict[str, str], oid: int, action: str, body: Any = None) -> Any:
    return client.post(f"{API}/work-orders/{oid}/{action}", json=body, headers=h)


def _sums_agree(db: Session, room: int, lt: int, bal: dict[str, Any]) -> None:
    db.expire_all()
    assert ledger.ledger_sums(db, room, lt) == (bal["on_hand"], bal["reserved"])


def test_issue_reserves_completion_issues_used_and_releases_rest(
    client: TestClient, db: Session, writer: dict[str, str]
) -> None:
    k = _setup(db)
    _stock(client, writer, k["room"], k["lt"], 10)
    oid = _order(client, writer, k["area"])
    assert _balance(client, writer, k["room"], k["lt"])["reserved"] == 0  # a draft holds nothing
    assert _post(client, writer, oid, "issue").status_code == 200
    bal = _balance(client, writer, k["room"], k["lt"])
    assert (bal["on_hand"], bal["reserved"], bal["available"]) == (10, 6, 4)
    assert _post(client, writer, oid, "issue").status_code == 200  # a retry reserves nothing more
    assert _balance(client, writer, k["room"], k["lt"])["reserved"] == 6
    assert _post(client, writer, oid, "start").status_code == 200
    skipped = {"fixture_id": k["fixtures"][0].id, "outcome": "skipped", "reason": "no access"}
    body = {"outcomes": [skipped], "others": "replaced"}
    r = _post(client, writer, oid, "complete", body)
    assert r.status_code == 200, r.text
    bal = _balance(client, writer, k["room"], k["lt"])
    # 6 reserved; 4 fitted (one two-lamp fixture skipped); 2 back on the shelf.
    assert (bal["on_hand"], bal["reserved"], bal["available"]) == (6, 0, 6)
    assert _post(client, writer, oid, "complete", body).status_code == 200  # retry: no double
    bal = _balance(client, writer, k["room"], k["lt"])
    assert (bal["on_hand"], bal["reserved"]) == (6, 0)
    _sums_agree(db, k["room"], k["lt"], bal)
    steps = db.scalars(
        select(StockMovement.step)
        .where(StockMovement.work_order_id == oid)
        .order_by(StockMovement.id)
    ).all()
    assert steps == ["issued", "completed", "completed_release"]


def test_cancel_releases_the_reservation(
    client: TestClient, db: Session, writer: dict[str, str]
) -> None:
    k = _setup(db)
    _stock(client, writer, k["room"], k["lt"], 8)
    oid = _order(client, writer, k["area"])
    _post(client, writer, oid, "issue")
    _post(client, writer, oid, "start")
    assert _balance(client, writer, k["room"], k["lt"])["reserved"] == 6
    assert _post(client, writer, oid, "cancel", {"reason": "weather"}).status_code == 200
    assert _post(client, writer, oid, "cancel", {"reason": "weather"}).status_code == 200
    bal = _balance(client, writer, k["room"], k["lt"])
    assert (bal["on_hand"], bal["reserved"], bal["available"]) == (8, 0, 8)
    _sums_agree(db, k["room"], k["lt"], bal)


def test_short_stock_reserves_what_there_is_and_completion_refuses(
    client: TestClient, db: Session, writer: dict[str, str]
) -> None:
    k = _setup(db)
    _stock(client, writer, k["room"], k["lt"], 3)
    oid = _order(client, writer, k["area"])
    _post(client, writer, oid, "issue")
    bal = _balance(client, writer, k["room"], k["lt"])
    assert (bal["reserved"], bal["available"]) == (3, 0)  # all there was, never below zero
    _post(client, writer, oid, "start")
    r = _post(client, writer, oid, "complete", {"others": "replaced"})
    assert r.status_code == 409, r.text
    assert r.headers["content-type"].startswith("application/problem+json")
    assert r.json()["errors"][0]["field"] == "outcomes"
    order = client.get(f"{API}/work-orders/{oid}", headers=writer).json()
    assert order["state"] == "in_progress"  # nothing recorded
    # A delivery arrives: now the completion goes through.
    body = {"lamp_type_id": k["lt"], "kind": "received", "quantity": 3}
    client.post(f"{API}/storerooms/{k['room']}/movements", json=body, headers=writer)
    assert _post(client, writer, oid, "complete", {"others": "replaced"}).status_code == 200
    bal = _balance(client, writer, k["room"], k["lt"])
    assert (bal["on_hand"], bal["reserved"]) == (0, 0)


def test_unstocked_types_do_not_block_orders(
    client: TestClient, db: Session, writer: dict[str, str]
) -> None:
    k = _setup(db)  # storeroom but no stock line for the lamp type
    oid = _order(client, writer, k["area"])
    for action in ("issue", "start"):
        assert _post(client, writer, oid, action).status_code == 200
    assert _post(client, writer, oid, "complete", {"others": "replaced"}).status_code == 200
    assert db.scalars(select(StockMovement)).all() == []


def test_manual_movements_never_go_negative_except_a_count(
    client: TestClient, db: Session, writer: dict[str, str]
) -> None:
    k = _setup(db)
    _stock(client, writer, k["room"], k["lt"], 5)
    url = f"{API}/storerooms/{k['room']}/movements"
    r = client.post(
        url, json={"lamp_type_id": k["lt"], "kind": "issued", "quantity": 6}, headers=writer
    )
    assert r.status_code == 409 and r.json()["errors"][0]["field"] == "quantity"
    oid = _order(client, writer, k["area"])
    _post(client, writer, oid, "issue")  # reserves all 5
    r = client.post(
        url, json={"lamp_type_id": k["lt"], "kind": "issued", "quantity": 1}, headers=writer
    )
    assert r.status_code == 409  # reserved lamps are not available to take
    # A count finds only 2 on the shelf: available goes negative, by the count alone.
    r = client.post(
        url, json={"lamp_type_id": k["lt"], "kind": "counted", "quantity": 2}, headers=writer
    )
    assert r.status_code == 201, r.text
    assert r.json()["on_hand_delta"] == -3
    bal = _balance(client, writer, k["room"], k["lt"])
    assert (bal["on_hand"], bal["reserved"], bal["available"]) == (2, 5, -3)
    _sums_agree(db, k["room"], k["lt"], bal)
    ledger_rows = client.get(f"{url}?lamp_type_id={k['lt']}", headers=writer).json()
    assert [m["kind"] for m in ledger_rows["items"]] == ["received", "reserved", "counted"]


def test_effect_rules_directly(db: Session) -> None:
    """The rule table on a balance in memory (no database write)."""
    from service.stock.models import StockBalance

    bal = StockBalance(storeroom_id=1, lamp_type_id=1, on_hand=4, reserved=3)
    assert ledger.effect(bal, "received", 2) == ledger.Effect(2, 0)
    assert ledger.effect(bal, "reserved", 1) == ledger.Effect(0, 1)
    with pytest.raises(Conflict):
        ledger.effect(bal, "reserved", 2)
    assert ledger.effect(bal, "issued", 3, own_reserved=3) == ledger.Effect(-3, -3)
    assert ledger.effect(bal, "issued", 4, own_reserved=3) == ledger.Effect(-4, -3)
    with pytest.raises(Conflict):
        ledger.effect(bal, "issued", 5, own_reserved=3)
    with pytest.raises(Conflict):
        ledger.effect(bal, "released", 2, own_reserved=1)
    assert ledger.effect(bal, "counted", 0) == ledger.Effect(-4, 0)
