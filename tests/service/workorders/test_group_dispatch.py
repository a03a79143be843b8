"""No double dispatch: a group order takes over its area's burnouts and spot orders."""

from __future__ import annotations

from datetime import timedelta
from pathlib import Path
from typing import Any

import pytest
from sqlalchemy import func, select
from sqlalchemy.orm import Session, sessionmaker

from service.db.base import utcnow
from service.events import burnouts
from service.events.models import BurnoutReport, LampRemoval
from service.planning.service import local_today, site_plans
from service.planning.site_schedule import capacity_of, site_schedule
from service.register.models import Area, Fixture, LampPosition, Site
from service.scheduling.runner import run_site_week
from service.seed.loader import load_demo
from service.workorders import service as orders
from service.workorders.models import WorkOrder, WorkOrderKind, WorkOrderState
from service.workorders.repository import last_group_relamps
from service.workorders.schemas import CancelBody, CompleteBody, WorkOrderCreate
from tests.factories import plan_area, plan_fixtures, plan_lamp_type, plan_site

GROUP, SPOT = WorkOrderKind.GROUP_RELAMP, WorkOrderKind.SPOT_REPLACEMENT
OPEN = (WorkOrderState.DRAFT, WorkOrderState.ISSUED, WorkOrderState.IN_PROGRESS)


@pytest.fixture()
def factory(db: Session) -> sessionmaker[Session]:
    """Sessions on the test connection: a run's commit releases a savepoint, nothing more."""
    return sessionmaker(
        bind=db.get_bind(), expire_on_commit=False, join_transaction_mode="create_savepoint"
    )


def _due_areas(db: Session, site: Site) -> list[int]:
    """Areas the run orders: due in the look-ahead and, with a capacity, in this week's slots."""
    today = local_today(site, utcnow())
    horizon = today + timedelta(weeks=site.lookahead_weeks)
    plans = site_plans(db, site, last_relamps=last_group_relamps)
    due = [p.area.id for p in plans if p.due_on is not None and p.due_on <= horizon]
    if not capacity_of(site).limited:
        return due
    slots = site_schedule(site, plans, today, horizon).slots
    return [a for a in due if a in slots and slots[a].week == 0]


def _first_position(db: Session, area_id: int) -> LampPosition:
    stmt = (
        select(LampPosition)
        .join(Fixture, Fixture.id == LampPosition.fixture_id)
        .where(Fixture.area_id == area_id, LampPosition.burned_out_at.is_(None))
        .order_by(LampPosition.id)
    )
    pos = db.scalars(stmt).first()
    assert pos is not None
    return pos


def test_weekly_run_on_the_demo_leaves_no_separate_spot_order(
    db: Session, factory: sessionmaker[Session], tmp_path: Path
) -> None:
    load_demo(db, key_file=tmp_path / "key.txt")
    db.commit()
    sites = list(db.scalars(select(Site).order_by(Site.id)))
    due = {s.id: _due_areas(db, s) for s in sites}
    assert any(due.values()), "the demo should have areas due for a group relamp"
    # A dark lamp in every due area, and a spot order already open in the first one.
    for s in sites:
        for aid in due[s.id]:
            pos = _first_position(db, aid)
            burnouts.report_burnout(
                db, position_id=pos.id, reported_at=utcnow() - timedelta(hours=2)
            )
    db.commit()
    # Dark lamps change ages and risk, and so a capacity-limited site's week-0 slots: take
    # the areas due now, as the run will see them.
    due = {s.id: _due_areas(db, s) for s in sites}
    first_site = next(s for s in sites if due[s.id])
    early = orders.create(db, WorkOrderCreate(area_id=due[first_site.id][0], kind=SPOT))
    db.commit()
    for s in sites:
        run = run_site_week(factory, s.id, trigger="api")
        assert run.outcome == "succeeded", run.error
    db.expire_all()
    grouped = db.scalars(
        select(WorkOrder).where(WorkOrder.kind == GROUP, WorkOrder.state.in_(OPEN))
    ).all()
    assert {g.area_id for g in grouped} >= {a for ids in due.values() for a in ids}
    for g in grouped:
        spots = db.scalars(
            select(WorkOrder).where(
                WorkOrder.area_id == g.area_id, WorkOrder.kind == SPOT, WorkOrder.state.in_(OPEN)
            )
        ).all()
        assert all(sp.covered_by_order_id == g.id for sp in spots), (g.area_id, spots)
        open_left = db.scalar(
            select(func.count()).where(
                BurnoutReport.area_id == g.area_id, BurnoutReport.status == "open"
            )
        )
        assert open_left == 0  # every dark lamp of the area is on the group order
        flagged = {r for ln in g.lines for r in (ln.report_ids or [])}
        reports = db.scalars(
            select(BurnoutReport.id).where(
                BurnoutReport.area_id == g.area_id, BurnoutReport.status != "closed"
            )
        ).all()
        assert set(reports) <= flagged
    db.refresh(early)
    g_early = next(g for g in grouped if g.area_id == early.area_id)
    assert early.covered_by_order_id == g_early.id and g_early.covers == [early.id]


def _area_with_dark_lamp(db: Session) -> tuple[Area, list[Any], BurnoutReport]:
    s = plan_site(db)
    lt = plan_lamp_type(db)
    a = plan_area(db, s)
    fx = plan_fixtures(db, a, lt, 3, lamps=2, installed_at=utcnow() - timedelta(weeks=20))
    rep = burnouts.report_burnout(
        db, position_id=fx[0].positions[0].id, reported_at=utcnow() - timedelta(hours=4)
    )
    db.commit()
    return a, fx, rep


def _started(db: Session, area_id: int, kind: str) -> WorkOrder:
    o = orders.create(db, WorkOrderCreate(area_id=area_id, kind=kind))
    orders.issue(db, o.id)
    orders.start(db, o.id)
    db.commit()
    return o


def test_completing_a_covering_group_order_settles_the_spot_order_once(db: Session) -> None:
    a, fx, rep = _area_with_dark_lamp(db)
    spot = _started(db, a.id, SPOT)
    group = _started(db, a.id, GROUP)
    db.expire_all()
    assert spot.covered_by_order_id == group.id and group.covers == [spot.id]
    dark_line = next(ln for ln in group.lines if ln.fixture_id == fx[0].id)
    assert dark_line.report_ids == [rep.id]  # flagged reported dark on the group order
    orders.complete(db, group.id, CompleteBody(others="replaced"))
    db.commit()
    db.expire_all()
    assert spot.state == "done" and spot.notes is not None
    assert f"Replaced by group order {group.id}" in spot.notes
    all_positions = [p.id for f in fx for p in f.positions]
    per_position = dict(
        db.execute(
            select(LampRemoval.position_id, func.count())
            .where(LampRemoval.position_id.in_(all_positions))
            .group_by(LampRemoval.position_id)
        ).all()
    )
    assert per_position == {pid: 1 for pid in all_positions}  # each removal once
    failed = db.scalars(
        select(LampRemoval).where(LampRemoval.position_id == fx[0].positions[0].id)
    ).one()
    assert failed.failed and failed.reason == "burnout"
    assert db.get(BurnoutReport, rep.id).status == "closed"  # type: ignore[union-attr]
    # A retried completion of the group order changes nothing.
    orders.complete(db, group.id, CompleteBody(others="replaced"))
    db.flush()
    assert db.scalar(select(func.count()).select_from(LampRemoval)) == len(all_positions)


def test_cancelling_the_group_order_releases_the_spot_order(db: Session) -> None:
    a, _, rep = _area_with_dark_lamp(db)
    spot = _started(db, a.id, SPOT)
    group = _started(db, a.id, GROUP)
    orders.cancel(db, group.id, CancelBody(reason="lift not available"))
    db.commit()
    db.expire_all()
    assert spot.state == "in_progress" and spot.covered_by_order_id is None
    assert group.covers == []
    assert db.get(BurnoutReport, rep.id).work_order_id == spot.id  # type: ignore[union-attr]
    orders.complete(db, spot.id, CompleteBody(others="replaced"))
    db.commit()
    assert db.scalar(select(func.count()).select_from(LampRemoval)) == 1


def test_spot_order_in_an_area_with_an_open_group_order_is_covered_from_the_start(
    db: Session,
) -> None:
    a, _, rep = _area_with_dark_lamp(db)
    group = _started(db, a.id, GROUP)
    db.expire_all()
    assert db.get(BurnoutReport, rep.id).work_order_id == group.id  # type: ignore[union-attr]
    pos = db.scalars(
        select(LampPosition)
        .join(Fixture)
        .where(Fixture.area_id == a.id, LampPosition.burned_out_at.is_(None))
    ).first()
    assert pos is not None
    burnouts.report_burnout(db, position_id=pos.id, reported_at=utcnow() - timedelta(hours=1))
    db.commit()
    spot = orders.create(db, WorkOrderCreate(area_id=a.id, kind=SPOT))
    db.commit()
    assert spot.covered_by_order_id == group.id
    orders.complete(db, group.id, CompleteBody(others="replaced"))
    db.commit()
    db.expire_all()
    assert spot.state == "done"
    assert (
        db.scalar(
            select(func.count()).where(
                BurnoutReport.status != "closed", BurnoutReport.area_id == a.id
            )
        )
        == 0
    )


def test_a_lamp_skipped_on_the_group_order_goes_back_to_open(db: Session) -> None:
    a, fx, rep = _area_with_dark_lamp(db)
    spot = _started(db, a.id, SPOT)
    group = _started(db, a.id, GROUP)
    body = CompleteBody.model_validate(
        {
            "positions": [
                {"position_id": fx[0].positions[0].id, "outcome": "skipped", "reason": "no lift"}
            ],
            "others": "replaced",
        }
    )
    orders.complete(db, group.id, body)
    db.commit()
    db.expire_all()
    assert spot.state == "done" and spot.notes is not None
    assert "1 burnout report(s) reopened" in spot.notes
    report = db.get(BurnoutReport, rep.id)
    assert report is not None and report.status == "open" and report.work_order_id is None
    # The next order for the area picks the dark lamp up again.
    again = orders.create(db, WorkOrderCreate(area_id=a.id, kind=SPOT))
    assert again.lines[0].report_ids == [rep.id]
