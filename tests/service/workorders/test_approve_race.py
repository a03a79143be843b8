"""Two planners approve (issue) one draft order at once: one moves it, stock is reserved once.

Each thread has its own session and transaction on a database of this module's own (a SQLite
file, where writers queue on BEGIN IMMEDIATE, or a scratch PostgreSQL database, where the
order's row lock decides), released together by a barrier, repeated on fresh orders.
"""

from __future__ import annotations

import threading
from datetime import timedelta

import pytest
from sqlalchemy import func, select
from sqlalchemy.orm import Session, sessionmaker

from service.api.errors import DomainError
from service.db.base import utcnow
from service.db.session import begin_write
from service.stock import ledger
from service.stock.models import StockBalance, StockMovement, Storeroom, StoreroomSite
from service.workorders import service as orders
from service.workorders.models import WorkOrder
from service.workorders.schemas import WorkOrderCreate
from tests import factories as fx
from tests import races

REPEATS = 6


# The race module's own committed database (a SQLite file, or a scratch PostgreSQL one).
race_engine = races.race_engine
factory = races.factory


def _draft(factory: sessionmaker[Session], rep: int) -> dict[str, int]:
    """A draft group order of three two-lamp fixtures; 10 lamps on the shelf."""
    with factory() as s:
        begin_write(s)
        site = fx.site(s, name=f"Approve Works {rep} {utcnow().timestamp()}")
        lt = fx.lamp_type(s, code=f"INC-A{site.id}")
        area = fx.area(s, site)
        fx.fixtures(s, area, lt, 3, lamps=2, installed_at=utcnow() - timedelta(weeks=20))
        room = Storeroom(name=f"Approve store {site.id}")
        s.add(room)
        s.flush()
        s.add(StoreroomSite(site_id=site.id, storeroom_id=room.id))
        bal = StockBalance(storeroom_id=room.id, lamp_type_id=lt.id)
        s.add(bal)
        s.flush()
        ledger.move(s, bal, "received", 10)
        order = orders.create(s, WorkOrderCreate(area_id=area.id, kind="group_relamp"))
        s.commit()
        return {"order": order.id, "room": room.id, "lt": lt.id}


def _race(factory: sessionmaker[Session], order_id: int) -> list[tuple[str, str]]:
    """Two issues of one order, released together: (outcome, state seen) per thread."""
    barrier = threading.Barrier(2)
    out: list[tuple[str, str]] = [("", "")] * 2

    def work(i: int) -> None:
        barrier.wait()
        with factory() as s:
            try:
                begin_write(s)
                got = orders.issue(s, order_id)
                state = got.state
                s.commit()
                out[i] = ("ok", state)
            except DomainError as exc:
                s.rollback()
                out[i] = (str(exc.status), "")

    threads = [threading.Thread(target=work, args=(i,)) for i in range(2)]
    for t in threads:
        t.start()
    for t in threads:
        t.join(timeout=120)
    assert all(not t.is_alive() for t in threads)
    return out


@pytest.mark.parametrize("rep", range(REPEATS))
def test_two_approvals_at_once_issue_once_and_reserve_once(
    factory: sessionmaker[Session], rep: int
) -> None:
    k = _draft(factory, rep)
    got = _race(factory, k["order"])
    # The second waits for the first (row lock or the SQLite writer queue), then finds the
    # order issued: a repeat of the same move answers the order unchanged (200), not 409.
    assert got == [("ok", "issued"), ("ok", "issued")]
    with factory() as s:
        order = s.get(WorkOrder, k["order"])
        assert order is not None and order.state == "issued"
        assert order.version == 2  # one move: created at 1, issued once
        bal = ledger.get_balance(s, k["room"], k["lt"])
        assert (bal.on_hand, bal.reserved, bal.available) == (10, 6, 4)
        assert ledger.ledger_sums(s, k["room"], k["lt"]) == (10, 6)
        moves = s.scalar(
            select(func.count())
            .select_from(StockMovement)
            .where(StockMovement.work_order_id == k["order"])
        )
        assert moves == 1  # one reservation movement, not two
