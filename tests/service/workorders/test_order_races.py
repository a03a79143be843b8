"""Two clients acting on one order or one area at the same moment: exactly one wins.

Each scenario runs its two requests in threads released together by a barrier, each
thread in its own session and transaction on a database of the module's own (a SQLite file
or a scratch PostgreSQL database), and is repeated REPEATS times on fresh records.
"""

from __future__ import annotations

import threading
from datetime import timedelta
from typing import Any

import pytest
from sqlalchemy import func, select
from sqlalchemy.orm import Session, sessionmaker

from service.api.errors import DomainError
from service.db.base import utcnow
from service.db.session import begin_write
from service.events import burnouts
from service.events.models import BurnoutReport, LampRemoval
from service.scheduling.runner import run_site_week
from service.workorders import service as orders
from service.workorders.models import WorkOrder, WorkOrderLine
from service.workorders.schemas import CancelBody, CompleteBody, WorkOrderCreate
from tests import races
from tests.factories import plan_area, plan_fixtures, plan_lamp_type, plan_site
from tests.races import in_transactions

REPEATS = 20


# The race module's own committed database (a SQLite file, or a scratch PostgreSQL one).
race_engine = races.race_engine
factory = races.factory


def _area(factory: sessionmaker[Session], *, reports: int = 0) -> tuple[int, int]:
    """A committed site with one area of 3 two-lamp fixtures; `reports` positions dark."""
    with factory() as s:
        site = plan_site(s)
        lt = plan_lamp_type(s)
        area = plan_area(s, site)
        fx = plan_fixtures(s, area, lt, 3, lamps=2, installed_at=utcnow() - timedelta(weeks=20))
        positions = [p for f in fx for p in f.positions]
        for p in positions[:reports]:
            burnouts.report_burnout(s, position_id=p.id, reported_at=utcnow() - timedelta(hours=2))
        s.commit()
        return site.id, area.id


def _order(factory: sessionmaker[Session], area_id: int, *, started: bool) -> int:
    """A committed group order for the area, issued and started when asked."""
    with factory() as s:
        begin_write(s)
        order = orders.create(s, WorkOrderCreate(area_id=area_id, kind="group_relamp"))
        if started:
            orders.issue(s, order.id)
            orders.start(s, order.id)
        s.commit()
        return order.id


def _count(factory: sessionmaker[Session], stmt: Any) -> int:
    with factory() as s:
        return int(s.scalar(stmt) or 0)


ALL_REPLACED = CompleteBody(others="replaced")


@pytest.mark.parametrize("rep", range(REPEATS))
def test_two_completes_record_removals_once(factory: sessionmaker[Session], rep: int) -> None:
    _, area_id = _area(factory)
    oid = _order(factory, area_id, started=True)
    got = in_transactions(
        factory,
        lambda s: orders.complete(s, oid, ALL_REPLACED),
        lambda s: orders.complete(s, oid, ALL_REPLACED),
    )
    # The second is a retry of a transition that already happened: 200, nothing written.
    assert got == ["ok", "ok"]
    removals = select(func.count()).select_from(LampRemoval).where(LampRemoval.work_order_id == oid)
    assert _count(factory, removals) == 6  # 3 fixtures x 2 lamps, once each
    with factory() as s:
        order = s.get(WorkOrder, oid)
        assert order is not None and order.state == "done"
        assert order.version == 4  # created, issued, started, done: one completion only


@pytest.mark.parametrize("rep", range(REPEATS))
def test_complete_against_cancel_has_one_winner(factory: sessionmaker[Session], rep: int) -> None:
    _, area_id = _area(factory)
    oid = _order(factory, area_id, started=True)
    got = in_transactions(
        factory,
        lambda s: orders.complete(s, oid, ALL_REPLACED),
        lambda s: orders.cancel(s, oid, CancelBody(reason="lift not available")),
    )
    assert sorted(got) == ["409", "ok"]
    removals = select(func.count()).select_from(LampRemoval).where(LampRemoval.work_order_id == oid)
    with factory() as s:
        order = s.get(WorkOrder, oid)
        assert order is not None
        assert order.state == ("done" if got[0] == "ok" else "cancelled")
    assert _count(factory, removals) == (6 if got[0] == "ok" else 0)


@pytest.mark.parametrize("rep", range(REPEATS))
def test_two_group_creates_for_one_area(factory: sessionmaker[Session], rep: int) -> None:
    _, area_id = _area(factory)
    body = WorkOrderCreate(area_id=area_id, kind="group_relamp")
    got = in_transactions(
        factory, lambda s: orders.create(s, body), lambda s: orders.create(s, body)
    )
    assert sorted(got) == ["409", "ok"]
    n = select(func.count()).select_from(WorkOrder).where(WorkOrder.area_id == area_id)
    assert _count(factory, n) == 1
    lines = (
        select(func.count())
        .select_from(WorkOrderLine)
        .join(WorkOrder, WorkOrder.id == WorkOrderLine.work_order_id)
        .where(WorkOrder.area_id == area_id)
    )
    assert _count(factory, lines) == 3


def _reports_single_homed(factory: sessionmaker[Session], area_id: int) -> None:
    """Every report of the area is taken by exactly one order; a group order covering that
    order may flag it too (reported dark), no other order lists it."""
    with factory() as s:
        reports = s.scalars(select(BurnoutReport).where(BurnoutReport.area_id == area_id)).all()
        homes: dict[int, list[int]] = {}
        for ln in s.scalars(
            select(WorkOrderLine)
            .join(WorkOrder, WorkOrder.id == WorkOrderLine.work_order_id)
            .where(WorkOrder.area_id == area_id)
        ):
            for rid in ln.report_ids or []:
                homes.setdefault(rid, []).append(ln.work_order_id)
        for r in reports:
            assert r.status == "ordered"
            owner = s.get(WorkOrder, r.work_order_id)
            assert owner is not None
            flagged_by = [h for h in homes.get(r.id, []) if h != owner.id]
            assert r.work_order_id in homes.get(r.id, []), (r.id, homes)
            assert flagged_by in ([], [owner.covered_by_order_id]), (r.id, homes)


@pytest.mark.parametrize("rep", range(REPEATS))
def test_two_spot_creates_over_the_same_reports(factory: sessionmaker[Session], rep: int) -> None:
    _, area_id = _area(factory, reports=2)
    body = WorkOrderCreate(area_id=area_id, kind="spot_replacement")
    got = in_transactions(
        factory, lambda s: orders.create(s, body), lambda s: orders.create(s, body)
    )
    assert sorted(got) == ["409", "ok"]
    spot = select(func.count()).select_from(WorkOrder).where(WorkOrder.area_id == area_id)
    assert _count(factory, spot) == 1
    _reports_single_homed(factory, area_id)


@pytest.mark.parametrize("rep", range(REPEATS))
def test_hand_made_spot_order_against_weekly_run(factory: sessionmaker[Session], rep: int) -> None:
    site_id, area_id = _area(factory, reports=2)
    body = WorkOrderCreate(area_id=area_id, kind="spot_replacement")
    barrier = threading.Barrier(2)
    outcome: dict[str, Any] = {}

    def by_hand() -> None:
        barrier.wait()
        with factory() as s:
            try:
                begin_write(s)
                orders.create(s, body)
                s.commit()
                outcome["hand"] = "ok"
            except DomainError as exc:
                outcome["hand"] = str(exc.status)

    def weekly() -> None:
        barrier.wait()
        outcome["run"] = run_site_week(factory, site_id, trigger="test").outcome

    threads = [threading.Thread(target=by_hand), threading.Thread(target=weekly)]
    for t in threads:
        t.start()
    for t in threads:
        t.join(timeout=120)
    assert outcome["run"] == "succeeded"
    assert outcome["hand"] in ("ok", "409")
    spot_orders = (
        select(func.count())
        .select_from(WorkOrder)
        .where(WorkOrder.area_id == area_id, WorkOrder.kind == "spot_replacement")
    )
    assert _count(factory, spot_orders) <= 1
    _reports_single_homed(factory, area_id)


@pytest.mark.parametrize("rep", range(REPEATS))
def test_group_completion_against_its_covered_spot_order(
    factory: sessionmaker[Session], rep: int
) -> None:
    _, area_id = _area(factory, reports=2)
    with factory() as s:
        begin_write(s)
        spot = orders.create(s, WorkOrderCreate(area_id=area_id, kind="spot_replacement"))
        orders.issue(s, spot.id)
        orders.start(s, spot.id)
        s.commit()
        spot_id = spot.id
    gid = _order(factory, area_id, started=True)
    got = in_transactions(
        factory,
        lambda s: orders.complete(s, gid, ALL_REPLACED),
        lambda s: orders.complete(s, spot_id, ALL_REPLACED),
    )
    assert got[0] == "ok" and got[1] in ("ok", "409")
    with factory() as s:
        dark = s.scalars(
            select(BurnoutReport.position_id).where(BurnoutReport.area_id == area_id)
        ).all()
        for pid in dark:  # one failure per dark lamp, whichever order got there first
            failed = select(func.count()).where(
                LampRemoval.position_id == pid, LampRemoval.failed.is_(True)
            )
            assert s.scalar(failed) == 1
        spot_after = s.get(WorkOrder, spot_id)
        assert spot_after is not None and spot_after.state == "done"
        open_reports = select(func.count()).where(
            BurnoutReport.area_id == area_id, BurnoutReport.status != "closed"
        )
        assert s.scalar(open_reports) == 0
