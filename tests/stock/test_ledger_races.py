"""Two completions drawing the last lamps at once: exactly one wins, the balance stays exact.

Each thread runs in its own session and transaction on a database of this module's own (a
SQLite file, or a scratch PostgreSQL database where the balance row lock is what decides),
released together by a barrier, repeated REPEATS times on fresh records.
"""

from __future__ import annotations

from datetime import timedelta

import pytest
from sqlalchemy.orm import Session, sessionmaker

from service.db.base import utcnow
from service.db.session import begin_write
from service.stock import ledger
from service.stock.models import StockBalance, Storeroom, StoreroomSite
from service.workorders import service as orders
from service.workorders.models import WorkOrder
from service.workorders.schemas import CancelBody, CompleteBody, WorkOrderCreate
from tests import races
from tests.factories import plan_area, plan_fixtures, plan_lamp_type, plan_site
from tests.races import in_transactions

REPEATS = 10


# The race module's own committed database (a SQLite file, or a scratch PostgreSQL one).
race_engine = races.race_engine
factory = races.factory


def _two_started_orders(factory: sessionmaker[Session], stock_after_issue: int) -> dict[str, int]:
    """One site, two areas of one two-lamp fixture, both orders started with nothing reserved;
    then `stock_after_issue` lamps arrive on the shelf."""
    with factory() as s:
        begin_write(s)
        site = plan_site(s)
        lt = plan_lamp_type(s)
        room = Storeroom(name=f"Race store {site.id}")
        s.add(room)
        s.flush()
        s.add(StoreroomSite(site_id=site.id, storeroom_id=room.id))
        bal = StockBalance(storeroom_id=room.id, lamp_type_id=lt.id)
        s.add(bal)
        ids = []
        for _ in range(2):
            area = plan_area(s, site)
            plan_fixtures(s, area, lt, 1, lamps=2, installed_at=utcnow() - timedelta(weeks=20))
            s.flush()
            order = orders.create(s, WorkOrderCreate(area_id=area.id, kind="group_relamp"))
            orders.issue(s, order.id)  # nothing on the shelf: nothing reserved
            orders.start(s, order.id)
            ids.append(order.id)
        locked = ledger.lock_balance(s, room.id, lt.id)
        assert locked is not None
        ledger.move(s, locked, "received", stock_after_issue)
        s.commit()
        return {"a": ids[0], "b": ids[1], "room": room.id, "lt": lt.id}


ALL_REPLACED = CompleteBody(others="replaced")


@pytest.mark.parametrize("rep", range(REPEATS))
def test_two_completions_draw_the_last_lamps(factory: sessionmaker[Session], rep: int) -> None:
    k = _two_started_orders(factory, stock_after_issue=2)  # enough for one order only
    got = in_transactions(
        factory,
        lambda s: orders.complete(s, k["a"], ALL_REPLACED),
        lambda s: orders.complete(s, k["b"], ALL_REPLACED),
    )
    assert sorted(got) == ["409", "ok"]  # exactly one wins
    with factory() as s:
        bal = s.get(StockBalance, ledger.get_balance(s, k["room"], k["lt"]).id)
        assert bal is not None
        assert (bal.on_hand, bal.reserved) == (0, 0)  # exact: 2 in, 2 out, never below zero
        assert ledger.ledger_sums(s, k["room"], k["lt"]) == (0, 0)
        states = sorted(s.get(WorkOrder, i).state for i in (k["a"], k["b"]))  # type: ignore[union-attr]
        assert states == ["done", "in_progress"]


@pytest.mark.parametrize("rep", range(REPEATS // 2))
def test_completion_and_cancel_of_another_order_keep_sums(
    factory: sessionmaker[Session], rep: int
) -> None:
    k = _two_started_orders(factory, stock_after_issue=4)  # both can be served
    got = in_transactions(
        factory,
        lambda s: orders.complete(s, k["a"], ALL_REPLACED),
        lambda s: orders.cancel(s, k["b"], CancelBody(reason="rain")),
    )
    assert got == ["ok", "ok"]
    with factory() as s:
        bal = ledger.get_balance(s, k["room"], k["lt"])
        assert (bal.on_hand, bal.reserved) == (2, 0)
        assert ledger.ledger_sums(s, k["room"], k["lt"]) == (2, 0)
