"""Retrofit-option writes under concurrency, a crash halfway, and history.

Threads released together by a barrier, each in its own session and committed transaction
on a database of this module's own (a SQLite file, or a scratch PostgreSQL database).
"""

from __future__ import annotations

from datetime import timedelta
from functools import partial

import pytest
from sqlalchemy import event, func, select
from sqlalchemy.orm import ORMExecuteState, Session, sessionmaker

from service.api.errors import DomainError
from service.catalogue.models import LampChoiceRecord, RetrofitOption
from service.db.base import utcnow
from service.db.session import begin_write
from service.planning import retrofit
from service.planning.retrofit import RetrofitOptionCreate
from service.workorders import service as workorders
from service.workorders.models import WorkOrder
from service.workorders.schemas import WorkOrderCreate
from tests import factories as fx
from tests import races
from tests.races import all_at_once

REPEATS = 10


# The race module's own committed database (a SQLite file, or a scratch PostgreSQL one).
race_engine = races.race_engine
factory = races.factory


def _hall(factory: sessionmaker[Session], n: int) -> tuple[int, int]:
    """A committed filament hall on 125 V; (area id, lamp type id)."""
    with factory() as s:
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


def _create(factory: sessionmaker[Session], body: RetrofitOptionCreate) -> int:
    with factory() as s:
        begin_write(s)
        oid = retrofit.create_option(s, body).id
        s.commit()
        return oid


def _delete(factory: sessionmaker[Session], oid: int) -> str:
    with factory() as s:
        begin_write(s)
        retrofit.delete_option(s, oid)
        s.commit()
        return "deleted"


def _order(factory: sessionmaker[Session], area_id: int) -> int:
    with factory() as s:
        begin_write(s)
        oid = workorders.create(s, WorkOrderCreate(area_id=area_id, kind="group_relamp")).id
        s.commit()
        return oid


def test_two_creates_of_one_code_make_one_option(factory: sessionmaker[Session]) -> None:
    _, lt_id = _hall(factory, 0)
    for i in range(REPEATS):
        body = _body(f"TWIN-{i}", lt_id)
        got = all_at_once([partial(_create, factory, body), partial(_create, factory, body)])
        made = [g for g in got if isinstance(g, int)]
        refused = [g for g in got if isinstance(g, DomainError)]
        assert len(made) == 1 and len(refused) == 1, got
        assert refused[0].status == 409
        with factory() as s:
            n = s.scalar(select(func.count()).where(RetrofitOption.code == body.code))
            assert n == 1


def test_delete_racing_an_order_that_names_the_option_leaves_no_dangling_history(
    factory: sessionmaker[Session],
) -> None:
    for i in range(REPEATS):
        area_id, lt_id = _hall(factory, 100 + i)
        oid = _create(factory, _body(f"RACE-LED-{i}", lt_id))
        got = all_at_once([partial(_delete, factory, oid), partial(_order, factory, area_id)])
        assert all(isinstance(g, (str, int, DomainError)) for g in got), got
        with factory() as s:
            alive = s.get(RetrofitOption, oid) is not None
            named = s.scalar(select(func.count()).where(LampChoiceRecord.retrofit_option_id == oid))
            assert got[0] == "deleted" or alive  # a refused delete leaves the option
            if not alive:
                assert named == 0  # deleted: nothing names it
            if isinstance(got[0], DomainError):
                assert named == 1  # refused because the order named it


def test_a_crash_after_the_orders_are_written_keeps_no_choice_record(
    factory: sessionmaker[Session],
) -> None:
    area_id, lt_id = _hall(factory, 900)
    _create(factory, _body("CRASH-LED", lt_id))

    # Failure injected from the test side (as tests/scheduling/faults.py does): the orders
    # and their lines are written, the choice records are the last insert and fail.
    def boom(state: ORMExecuteState) -> None:
        table = getattr(state.statement, "table", None)
        if state.is_insert and getattr(table, "name", None) == "lamp_choice_records":
            raise RuntimeError("crash before the choice records")

    with factory() as s:
        records_before = s.scalar(select(func.count()).select_from(LampChoiceRecord))
    event.listen(factory, "do_orm_execute", boom)
    try:
        with pytest.raises(RuntimeError):
            _order(factory, area_id)
    finally:
        event.remove(factory, "do_orm_execute", boom)
    with factory() as s:
        orders = s.scalars(select(WorkOrder.id).where(WorkOrder.area_id == area_id)).all()
        assert orders == []  # nothing half-written: the order went with the records
        assert s.scalar(select(func.count()).select_from(LampChoiceRecord)) == records_before
    # The same order made without the crash names the LED.
    order_id = _order(factory, area_id)
    with factory() as s:
        rec = s.scalar(select(LampChoiceRecord).where(LampChoiceRecord.work_order_id == order_id))
        assert rec is not None and rec.option_kind == "retrofit"
