"""The weekly run: one set of orders per site and week, all or nothing, recorded."""

from __future__ import annotations

from datetime import timedelta
from typing import Any

import pytest
from fastapi.testclient import TestClient
from sqlalchemy import func, select
from sqlalchemy.orm import Session, sessionmaker

from service.db.base import utcnow
from service.events import burnouts
from service.events.models import BurnoutReport
from service.planning.service import local_today, site_plans
from service.scheduling.models import RunWeek, WeeklyRun
from service.scheduling.runner import run_site_week
from service.scheduling.weeks import iso_week_of
from service.workorders.models import WorkOrder, WorkOrderLine
from service.workorders.repository import last_group_relamps
from tests.factories import plan_area, plan_fixtures, plan_lamp_type, plan_site
from tests.scheduling.faults import fail_before_lines


def portfolio(db: Session) -> dict[str, Any]:
    """A site with an overdue area, a young area, and two dark lamps in the young one."""
    s = plan_site(db)
    lt = plan_lamp_type(db)
    old = plan_area(db, s)
    young = plan_area(db, s)
    plan_fixtures(db, old, lt, 4, hours_at_install=20_000.0)
    fx = plan_fixtures(db, young, lt, 3)
    reports = [
        burnouts.report_burnout(
            db, position_id=f.positions[0].id, reported_at=utcnow() - timedelta(hours=3)
        )
        for f in fx[:2]
    ]
    db.commit()
    return {"site": s, "old": old, "young": young, "reports": [r.id for r in reports]}


def _counts(db: Session) -> tuple[int, int]:
    db.expire_all()
    orders = db.scalar(select(func.count()).select_from(WorkOrder)) or 0
    lines = db.scalar(select(func.count()).select_from(WorkOrderLine)) or 0
    return orders, lines


def test_run_issues_due_group_and_batched_spot_orders(
    db: Session, factory: sessionmaker[Session]
) -> None:
    p = portfolio(db)
    site = p["site"]
    plans = {x.area.id: x for x in site_plans(db, site, last_relamps=last_group_relamps)}
    horizon = local_today(site, utcnow()) + timedelta(weeks=site.lookahead_weeks)
    assert plans[p["old"].id].due_on is not None and plans[p["old"].id].due_on <= horizon
    young_due = plans[p["young"].id].due_on
    assert young_due is None or young_due > horizon

    run = run_site_week(factory, site.id, trigger="api")
    assert run.outcome == "succeeded", run.error
    assert (run.group_orders, run.spot_orders, run.orders_created) == (1, 1, 2)
    assert run.iso_week == iso_week_of(local_today(site, utcnow()))
    orders = db.scalars(select(WorkOrder).order_by(WorkOrder.id)).all()
    assert [(o.area_id, o.kind, o.state) for o in orders] == [
        (p["old"].id, "group_relamp", "issued"),
        (p["young"].id, "spot_replacement", "issued"),
    ]
    assert orders[0].lamp_quantity == 8 and orders[1].lamp_quantity == 2
    assert all(o.run_id == run.id and o.iso_week == run.iso_week for o in orders)
    statuses = {db.get(BurnoutReport, r).status for r in p["reports"]}  # type: ignore[union-attr]
    assert statuses == {"ordered"}


def test_repeated_run_creates_no_second_set(
    db: Session, factory: sessionmaker[Session], client: TestClient, reader: dict[str, str]
) -> None:
    p = portfolio(db)
    first = run_site_week(factory, p["site"].id, trigger="schedule")
    assert first.orders_created == 2
    snapshot = _counts(db)
    again = run_site_week(factory, p["site"].id, trigger="catch_up")
    assert again.outcome == "succeeded"
    assert (again.orders_created, again.orders_already_there) == (0, 2)
    assert _counts(db) == snapshot
    # A new dark lamp the same week: the area already has its spot order this week.
    extra = p["young"].fixtures[2].positions[0] if p["young"].fixtures else None
    assert extra is not None
    burnouts.report_burnout(db, position_id=extra.id, reported_at=utcnow() - timedelta(hours=1))
    db.commit()
    third = run_site_week(factory, p["site"].id, trigger="api")
    assert third.orders_created == 0 and _counts(db) == snapshot
    runs = client.get(f"/api/v1/runs?site_id={p['site'].id}", headers=reader).json()
    assert [r["id"] for r in runs["items"]] == [third.id, again.id, first.id]
    assert [r["trigger"] for r in runs["items"]] == ["api", "catch_up", "schedule"]
    claims = db.scalar(
        select(func.count()).select_from(RunWeek).where(RunWeek.site_id == p["site"].id)
    )
    assert claims == 1


def test_exception_halfway_leaves_no_half_written_order(
    db: Session, factory: sessionmaker[Session]
) -> None:
    p = portfolio(db)

    with fail_before_lines(factory, "injected failure after the orders, before their lines"):
        failed = run_site_week(factory, p["site"].id)
    assert failed.outcome == "failed" and failed.finished_at is not None
    assert failed.error is not None and "injected failure" in failed.error
    assert _counts(db) == (0, 0)
    assert {db.get(BurnoutReport, r).status for r in p["reports"]} == {"open"}  # type: ignore[union-attr]
    assert db.scalar(select(func.count()).select_from(RunWeek)) == 0  # the claim rolled back too
    ok = run_site_week(factory, p["site"].id)
    assert ok.outcome == "succeeded" and ok.orders_created == 2
    rec = db.get(WeeklyRun, failed.id)
    assert rec is not None and rec.outcome == "failed"  # the failure stays on record


def test_runs_over_the_api(
    client: TestClient,
    db: Session,
    writer: dict[str, str],
    reader: dict[str, str],
) -> None:
    p = portfolio(db)
    url = f"/api/v1/sites/{p['site'].id}/runs"
    assert client.post(url, headers=reader).status_code == 403
    bad = client.post(url, json={"week": "2026-W60"}, headers=writer)
    assert bad.status_code == 422 and bad.json()["errors"][0]["field"] == "week"
    assert client.post("/api/v1/sites/999999/runs", headers=writer).status_code == 404
    r = client.post(url, json={"week": "2026-W49"}, headers=writer)
    assert r.status_code == 201, r.text
    body = r.json()
    assert body["iso_week"] == "2026-W49" and body["outcome"] == "succeeded"
    assert body["orders_created"] == 2 and body["trigger"] == "api"
    got = client.get(f"/api/v1/runs/{body['id']}", headers=reader).json()
    assert got == body
    orders = client.get("/api/v1/work-orders?iso_week=2026-W49", headers=reader).json()
    assert orders["total"] == 2
    listed = client.get("/api/v1/runs?outcome=succeeded", headers=reader).json()
    assert body["id"] in [x["id"] for x in listed["items"]]


@pytest.mark.parametrize("week", ["2026-W01", "2026-W53"])
def test_week_names_round_trip(week: str) -> None:
    from service.scheduling.weeks import parse_week

    # ISO 8601 weeks (datetime.date.fromisocalendar): 2026 has 53 weeks.
    assert iso_week_of(parse_week(week)) == week
