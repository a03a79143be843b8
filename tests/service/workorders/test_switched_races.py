"""Two completions of one switched group order at once, and a crash halfway through one.

Threads in their own sessions and committed transactions (tests/races.py), released
together; the order's row lock (PostgreSQL) or the single writer (SQLite) decides.
"""

from __future__ import annotations

import pytest
from sqlalchemy import func, select
from sqlalchemy.orm import Session, sessionmaker

from service.db.session import begin_write
from service.events.models import LampRemoval
from service.register.models import Fixture
from service.stock import ledger
from service.workorders import choice_hooks
from service.workorders import service as orders
from service.workorders.models import WorkOrder
from service.workorders.schemas import CompleteBody, WorkOrderCreate
from tests import races
from tests.races import in_transactions
from tests.service.workorders.test_switched_orders import LAMPS, N, hall

race_engine = races.race_engine
factory = races.factory
REPEATS = 5
ALL = CompleteBody(others="replaced")


def _started(factory: sessionmaker[Session], rep: str) -> tuple[int, dict[str, int]]:
    with factory() as s:
        begin_write(s)
        k = hall(s, stock=20, led=False, name=rep)
        order = orders.create(s, WorkOrderCreate(area_id=k["area"], kind="group_relamp"))
        orders.issue(s, order.id)
        orders.start(s, order.id)
        s.commit()
        return order.id, k


def _state(factory: sessionmaker[Session], oid: int, k: dict[str, int]) -> tuple[object, ...]:
    with factory() as s:
        types = {s.get(Fixture, f).lamp_type_id for f in k["fixtures"]}  # type: ignore[union-attr]
        removals = s.scalar(select(func.count()).where(LampRemoval.work_order_id == oid))
        bal = ledger.get_balance(s, k["room"], k["new"])
        state = s.get(WorkOrder, oid).state  # type: ignore[union-attr]
        return state, types, removals, bal.on_hand, bal.reserved


@pytest.mark.parametrize("rep", range(REPEATS))
def test_two_completions_switch_once(factory: sessionmaker[Session], rep: int) -> None:
    oid, k = _started(factory, f"race {rep}")
    got = in_transactions(
        factory, lambda s: orders.complete(s, oid, ALL), lambda s: orders.complete(s, oid, ALL)
    )
    assert got == ["ok", "ok"]  # the second waits, then answers the done order (a retry)
    assert _state(factory, oid, k) == ("done", {k["new"]}, N * LAMPS, 20 - N * LAMPS, 0)


def test_a_crash_after_the_switch_leaves_nothing(
    factory: sessionmaker[Session], monkeypatch: pytest.MonkeyPatch
) -> None:
    oid, k = _started(factory, "crash")
    real = choice_hooks.switch_fixtures

    def crash(session: Session, order: WorkOrder) -> list[int]:
        real(session, order)
        session.flush()
        raise RuntimeError("process died")

    monkeypatch.setattr(choice_hooks, "switch_fixtures", crash)
    with pytest.raises(RuntimeError), factory() as s:
        begin_write(s)
        orders.complete(s, oid, ALL)
    assert _state(factory, oid, k) == ("in_progress", {k["old"]}, 0, 20, N * LAMPS)
    monkeypatch.setattr(choice_hooks, "switch_fixtures", real)
    with factory() as s:  # the retry after the crash completes it once
        begin_write(s)
        orders.complete(s, oid, ALL)
        s.commit()
    assert _state(factory, oid, k) == ("done", {k["new"]}, N * LAMPS, 20 - N * LAMPS, 0)
