"""Retrofit-option writes under concurrency, a crash halfway, and history.

Threads released together by a barrier, each in its own session and committed transaction
on a database of this module's own (a SQLite file, or a scratch PostgreSQL database).
"""

from __future__ import annotations

import os
import threading
from collections.abc import Callable, Iterator
from datetime import timedelta
from functools import partial
from pathlib import Path
from typing import Any

import pytest
from sqlalchemy import Engine, event, func, select
from sqlalchemy.orm import ORMExecuteState, Session, sessionmaker

from service.api.errors import DomainError
from service.catalogue.models import LampChoiceRecord, RetrofitOption
from service.db.base import utcnow
from service.db.session import begin_write, make_engine, session_factory
from service.planning import retrofit
from service.planning.retrofit import RetrofitOptionCreate
from service.workorders import service as workorders
from service.workorders.models import WorkOrder
from service.workorders.schemas import WorkOrderCreate
from tests import factories as fx
from tests.conftest import migrate, scratch_postgres

REPEATS = 10


@pytest.fixture(scope="module")
def choice_engine(tmp_path_factory: pytest.TempPathFactory) -> Iterator[Engine]:
    """A migrated database of this module's own: the threads commit for real."""
    base_url = os.environ.get("TEST_DATABASE_URL") or ""
    if not base_url.startswith("postgresql"):
        path: Path = tmp_path_factory.mktemp("choice") / "choice.sqlite3"
        eng = make_engine(f"sqlite:///{path}")
        migrate(eng)
        yield eng
        eng.dispose()
        return
    with scratch_postgres(base_url, "choice") as url:
        eng = make_engine(url)
        yield eng
        eng.dispose()


@pytest.fixture(scope="module")
def make(choice_engine: Engine) -> sessionmaker[Session]:
    """Sessions on the module's database."""
    return session_factory(choice_engine)


def _both(calls: list[Callable[[], Any]]) -> list[Any]:
    """Run the calls in threads released together; results or the exceptions raised."""
    barrier = threading.Barrier(len(calls))
    out: list[Any] = [None] * len(calls)

    def run(i: int) -> None:
        barrier.wait()
        try:
            out[i] = calls[i]()
        except Exception as exc:  # the test inspects what each got
            out[i] = exc

    threads = [threading.Thread(target=run, args=(i,)) for i in range(len(calls))]
    for t in threads:
        t.start()
    for t in threads:
        t.join()
    return out


def _hall(make: sessionmaker[Session], n: int) -> tuple[int, int]:
    """A committed filament hall on 125 V; (area id, lamp type id)."""
    with make() as s:
        site = fx.site(s, f"Race Hall {n}", time_zone="America/Chicago", nominal_voltage_v=120.0)
        a = fx.area(s, site, "Hall", group_minutes_per_lamp=4.0, spot_minutes_per_lamp=20.0)
        lt = fx.lamp_type(s, f"RACE-{n}", rated_volts=120.0, unit_price=1.0)
        fx.fixtures(
            s, a, lt, 4, installed_at=utcnow() - timedelta(days=300), measured_voltage_v=125.0
        )
        s.commit()
        return a.id, lt.id


def _body(code: str, lt_id: int) -> RetrofitOptionCreate:
    return RetrofitOptionCreate(
        code=code, kind="led_lamp", lamp_type_id=lt_id, kit_cost_per_unit=5.0,
        labour_minutes_per_unit=3.0, watts_per_unit=12.0, lumens_per_unit=1500.0, l70_h=25_000.0,
    )  # fmt: skip


def _create(make: sessionmaker[Session], body: RetrofitOptionCreate) -> int:
    with make() as s:
        begin_write(s)
        oid = retrofit.create_option(s, body).id
        s.commit()
        return oid


def _delete(make: sessionmaker[Session], oid: int) -> str:
    with make() as s:
        begin_write(s)
        retrofit.delete_option(s, oid)
        s.commit()
        return "deleted"


def _order(make: sessionmaker[Session], area_id: int) -> int:
    with make() as s:
        begin_write(s)
        oid = workorders.create(s, WorkOrderCreate(area_id=area_id, kind="group_relamp")).id
        s.commit()
        return oid


def test_two_creates_of_one_code_make_one_option(make: sessionmaker[Session]) -> None:
    _, lt_id = _hall(make, 0)
    for i in range(REPEATS):
        body = _body(f"TWIN-{i}", lt_id)
        got = _both([partial(_create, make, body), partial(_create, make, body)])
        made = [g for g in got if isinstance(g, int)]
        refused = [g for g in got if isinstance(g, DomainError)]
        assert len(made) == 1 and len(refused) == 1, got
        assert refused[0].status == 409
        with make() as s:
            n = s.scalar(select(func.count()).where(RetrofitOption.code == body.code))
            assert n == 1


def test_delete_racing_an_order_that_names_the_option_leaves_no_dangling_history(
    make: sessionmaker[Session],
) -> None:
    for i in range(REPEATS):
        area_id, lt_id = _hall(make, 100 + i)
        oid = _create(make, _body(f"RACE-LED-{i}", lt_id))
        got = _both([partial(_delete, make, oid), partial(_order, make, area_id)])
        assert all(isinstance(g, (str, int, DomainError)) for g in got), got
        with make() as s:
            alive = s.get(RetrofitOption, oid) is not None
            named = s.scalar(select(func.count()).where(LampChoiceRecord.retrofit_option_id == oid))
            assert got[0] == "deleted" or alive  # a refused delete leaves the option
            if not alive:
                assert named == 0  # deleted: nothing names it
            if isinstance(got[0], DomainError):
                assert named == 1  # refused because the order named it


def test_a_crash_after_the_orders_are_written_keeps_no_choice_record(
    make: sessionmaker[Session],
) -> None:
    area_id, lt_id = _hall(make, 900)
    _create(make, _body("CRASH-LED", lt_id))

    # Failure injected from the test side (as tests/scheduling/faults.py does): the orders
    # and their lines are written, the choice records are the last insert and fail.
    def boom(state: ORMExecuteState) -> None:
        table = getattr(state.statement, "table", None)
        if state.is_insert and getattr(table, "name", None) == "lamp_choice_records":
            raise RuntimeError("crash before the choice records")

    with make() as s:
        records_before = s.scalar(select(func.count()).select_from(LampChoiceRecord))
    event.listen(make, "do_orm_execute", boom)
    try:
        with pytest.raises(RuntimeError):
            _order(make, area_id)
    finally:
        event.remove(make, "do_orm_execute", boom)
    with make() as s:
        orders = s.scalars(select(WorkOrder.id).where(WorkOrder.area_id == area_id)).all()
        assert orders == []  # nothing half-written: the order went with the records
        assert s.scalar(select(func.count()).select_from(LampChoiceRecord)) == records_before
    # The same order made without the crash names the LED.
    order_id = _order(make, area_id)
    with make() as s:
        rec = s.scalar(select(LampChoiceRecord).where(LampChoiceRecord.work_order_id == order_id))
        assert rec is not None and rec.option_kind == "retrofit"
