"""Stock reserved by the weekly run for the orders it creates issued, from the lines it wrote.

Rules (service.workorders.stock_hooks, the ledger's docstring): each new order reserves
what its lines call for of every stocked type, or what is still available when stock is
short, lowest order id first; unstocked types move nothing; one movement per (order,
step "issued", lamp type).
"""

from __future__ import annotations

from datetime import timedelta

from sqlalchemy import select
from sqlalchemy.orm import Session

from service.db.base import utcnow
from service.stock import ledger
from service.stock.models import MovementKind, StockBalance, StockMovement, Storeroom, StoreroomSite
from service.workorders.issue import GROUP, issue_orders
from service.workorders.models import WorkOrder
from tests import factories as fx


def test_run_reserves_lowest_order_first_and_what_is_left_when_short(db: Session) -> None:
    s = fx.site(db, name="Reserve Works")
    stocked, other = fx.lamp_type(db, code="INC-RS"), fx.lamp_type(db, code="INC-RX")
    long_ago = utcnow() - timedelta(weeks=20)
    a1, a2, a3 = fx.area(db, s, name="A1"), fx.area(db, s, name="A2"), fx.area(db, s, name="A3")
    fx.fixtures(db, a1, stocked, 3, lamps=2, installed_at=long_ago, tag="P")  # needs 6
    fx.fixtures(db, a2, stocked, 3, lamps=2, installed_at=long_ago, tag="Q")  # needs 6
    fx.fixtures(db, a3, other, 2, lamps=2, installed_at=long_ago, tag="R")  # not stocked
    room = Storeroom(name="Reserve store")
    db.add(room)
    db.flush()
    db.add(StoreroomSite(site_id=s.id, storeroom_id=room.id))
    bal = StockBalance(storeroom_id=room.id, lamp_type_id=stocked.id)
    db.add(bal)
    db.flush()
    ledger.move(db, bal, MovementKind.RECEIVED, 8)  # 8 on the shelf for 12 wanted
    result = issue_orders(
        db, s, at=utcnow(), iso_week="2026-W49", run_id=None, state="issued", lookahead_weeks=4
    )
    orders = {a: o for o, a, k in result.created if k == GROUP}
    assert set(orders) == {a1.id, a2.id, a3.id}
    first, second = sorted((orders[a1.id], orders[a2.id]))
    moves = db.execute(
        select(StockMovement.work_order_id, StockMovement.lamp_type_id, StockMovement.quantity)
        .where(StockMovement.kind == MovementKind.RESERVED, StockMovement.step == "issued")
        .order_by(StockMovement.id)
    ).all()
    # 6 for the lower order id, the 2 left for the next one, none for the unstocked type.
    assert [tuple(m) for m in moves] == [(first, stocked.id, 6), (second, stocked.id, 2)]
    db.refresh(bal)
    assert (bal.on_hand, bal.reserved) == (8, 8)
    assert db.get(WorkOrder, orders[a3.id]) is not None  # the unstocked order still went out
