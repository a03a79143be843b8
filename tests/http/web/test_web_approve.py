"""A draft order's page: planners get the approve button, and approving issues and reserves."""

from __future__ import annotations

from datetime import timedelta

from fastapi.testclient import TestClient
from sqlalchemy.orm import Session

from service.db.base import utcnow
from service.stock import ledger
from service.stock.models import StockBalance, Storeroom, StoreroomSite
from service.workorders import service as orders
from service.workorders.models import WorkOrder
from service.workorders.schemas import WorkOrderCreate
from tests import factories as fx
from tests.http.web.signin import sign_in_as

BUTTON = "Approve and issue"


def _draft(db: Session) -> tuple[int, int, int]:
    """A draft group order of two two-lamp fixtures, 10 lamps stocked; (order, room, type)."""
    s = fx.site(db)
    lt = fx.lamp_type(db)
    a = fx.area(db, s)
    fx.fixtures(db, a, lt, 2, lamps=2, installed_at=utcnow() - timedelta(weeks=20))
    room = Storeroom(name=f"Web store {s.id}")
    db.add(room)
    db.flush()
    db.add(StoreroomSite(site_id=s.id, storeroom_id=room.id))
    bal = StockBalance(storeroom_id=room.id, lamp_type_id=lt.id)
    db.add(bal)
    db.flush()
    ledger.move(db, bal, "received", 10)
    order = orders.create(db, WorkOrderCreate(area_id=a.id, kind="group_relamp"))
    db.commit()
    return order.id, room.id, lt.id


def test_only_planners_see_and_use_the_approve_button(client: TestClient, db: Session) -> None:
    oid, room, lt = _draft(db)
    token = sign_in_as(client, db, "technician")
    assert BUTTON not in client.get(f"/app/work-orders/{oid}").text
    r = client.post(f"/app/work-orders/{oid}/issued", data={"csrf_token": token})
    assert r.status_code == 403
    token = sign_in_as(client, db, "planner")
    page = client.get(f"/app/work-orders/{oid}").text
    assert BUTTON in page
    r = client.post(
        f"/app/work-orders/{oid}/issued", data={"csrf_token": token}, follow_redirects=False
    )
    assert r.status_code == 303, r.text
    db.expire_all()
    order = db.get(WorkOrder, oid)
    assert order is not None and order.state == "issued"
    assert ledger.get_balance(db, room, lt).reserved == 4  # two fixtures x two lamps
    assert BUTTON not in client.get(f"/app/work-orders/{oid}").text  # issued: no button
