"""Retirement rules in the services: open orders block it, weekly runs skip it, RESTRICT holds."""

from __future__ import annotations

from datetime import timedelta

import pytest
from sqlalchemy import func, select
from sqlalchemy.exc import IntegrityError
from sqlalchemy.orm import Session, sessionmaker

from service.api.errors import Conflict
from service.db.base import utcnow
from service.events import burnouts
from service.events.models import BurnoutReport
from service.register.models import Area, Fixture, LampPosition, Site
from service.retirement import service as retire
from service.scheduling.runner import run_site_week
from service.workorders.models import WorkOrder, WorkOrderLine
from tests.factories import plan_area, plan_fixtures, plan_lamp_type, plan_site


def _open_order(db: Session, fixture: Fixture, state: str = "issued") -> WorkOrder:
    """A hand-made spot order with one line on the fixture."""
    order = WorkOrder(
        site_id=fixture.site_id,
        area_id=fixture.area_id,
        kind="spot_replacement",
        state=state,
        access_method="ladder",
    )
    pos = fixture.positions[0]
    order.lines.append(
        WorkOrderLine(
            fixture_id=fixture.id,
            fixture_tag=fixture.tag,
            lamp_type_id=fixture.lamp_type_id,
            lamp_type_code="X",
            quantity=1,
            position_ids=[pos.id],
            position_nos=[pos.position_no],
        )
    )
    db.add(order)
    db.flush()
    return order


@pytest.mark.parametrize("state", ["draft", "issued", "in_progress"])
def test_retire_refused_while_on_an_open_order(db: Session, state: str) -> None:
    s = plan_site(db)
    lt = plan_lamp_type(db)
    a = plan_area(db, s)
    f, _other = plan_fixtures(db, a, lt, 2)
    order = _open_order(db, f, state)
    for act, rid in (
        (retire.retire_fixture, f.id),
        (retire.retire_area, a.id),
        (retire.retire_site, s.id),
        (retire.retire_lamp_type, lt.id),
    ):
        with pytest.raises(Conflict) as err:
            act(db, rid)
        assert err.value.status == 409 and str(order.id) in err.value.detail
    assert f.retired_at is None and a.retired_at is None and s.retired_at is None
    # Settled: the fixture may go.
    order.state = "completed"
    db.flush()
    assert retire.retire_fixture(db, f.id).retired_at is not None
    assert db.get(Fixture, _other.id).retired_at is None  # type: ignore[union-attr]


def test_retire_area_retires_its_fixtures_once(db: Session) -> None:
    s = plan_site(db)
    lt = plan_lamp_type(db)
    a = plan_area(db, s)
    keep = plan_area(db, s)
    fx = plan_fixtures(db, a, lt, 2)
    (other,) = plan_fixtures(db, keep, lt, 1)
    early = retire.retire_fixture(db, fx[0].id).retired_at
    v0 = fx[0].version
    area = retire.retire_area(db, a.id)
    assert area.retired_at is not None
    db.expire_all()
    f0, f1 = (db.get(Fixture, f.id) for f in fx)
    assert f0 is not None and f1 is not None
    assert f0.retired_at == early and f0.version == v0  # already retired: left as it was
    assert f1.retired_at == area.retired_at
    assert db.get(Fixture, other.id).retired_at is None  # type: ignore[union-attr]
    again = retire.retire_area(db, a.id)
    assert again.retired_at == area.retired_at and again.version == area.version


def test_weekly_run_gives_a_retired_fixture_no_work(db: Session) -> None:
    s = plan_site(db)
    lt = plan_lamp_type(db)
    a = plan_area(db, s)
    old = plan_fixtures(db, a, lt, 4, hours_at_install=20_000.0)  # long overdue: a group relamp
    young = plan_area(db, s)
    dark = plan_fixtures(db, young, lt, 2)
    for f in dark:
        burnouts.report_burnout(
            db, position_id=f.positions[0].id, reported_at=utcnow() - timedelta(hours=3)
        )
    retired = [old[0].id, dark[0].id]
    for fid in retired:
        retire.retire_fixture(db, fid)
    db.commit()
    factory = sessionmaker(
        bind=db.get_bind(), expire_on_commit=False, join_transaction_mode="create_savepoint"
    )
    run = run_site_week(factory, s.id, trigger="api")
    assert run.outcome == "succeeded", run.error
    db.expire_all()
    lines = db.scalars(select(WorkOrderLine)).all()
    on_orders = {ln.fixture_id for ln in lines}
    assert on_orders, "the run issued no order at all: the test would prove nothing"
    assert {old[1].id, dark[1].id} <= on_orders
    assert not on_orders & set(retired)
    # The retired fixture's open report stays open, on no order.
    report = db.scalars(select(BurnoutReport).where(BurnoutReport.fixture_id == dark[0].id)).one()
    assert report.work_order_id is None


def test_raw_delete_of_a_site_with_history_fails_at_the_database(db: Session) -> None:
    s = plan_site(db)
    lt = plan_lamp_type(db)
    a = plan_area(db, s)
    (f,) = plan_fixtures(db, a, lt, 1)
    burnouts.report_burnout(
        db, position_id=f.positions[0].id, reported_at=utcnow() - timedelta(hours=3)
    )
    db.commit()
    counts = [
        db.scalar(select(func.count()).select_from(m)) for m in (Site, Area, Fixture, LampPosition)
    ]
    # No history check here: only the RESTRICT keys stand in the way.
    with pytest.raises(IntegrityError), db.begin_nested():
        db.delete(s)
        db.flush()
    db.expire_all()
    after = [
        db.scalar(select(func.count()).select_from(m)) for m in (Site, Area, Fixture, LampPosition)
    ]
    assert after == counts
    assert db.scalar(select(func.count()).select_from(BurnoutReport)) == 1


def test_hard_delete_without_history_still_works(db: Session) -> None:
    from service.register import sites as register

    s = plan_site(db)
    lt = plan_lamp_type(db)
    a = plan_area(db, s)
    plan_fixtures(db, a, lt, 2)
    db.commit()
    register.delete_site(db, s.id)
    assert db.scalar(select(func.count()).select_from(Fixture)) == 0
    assert db.scalar(select(func.count()).select_from(LampPosition)) == 0
