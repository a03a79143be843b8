"""The overview's site rows and due-soon list: counts a person reads, not every plan."""

from __future__ import annotations

import re
from datetime import date, timedelta

import pytest
from fastapi.testclient import TestClient
from sqlalchemy import select
from sqlalchemy.orm import Session

from service.db.base import utcnow
from service.events.burnouts import report_burnout
from service.planning import service as planning
from service.register.models import Fixture, LampPosition, Site
from service.web import overview
from service.workorders import service as orders
from service.workorders.repository import last_group_relamps
from service.workorders.schemas import CancelBody, WorkOrderCreate
from tests.factories import plan_area, plan_fixtures, plan_lamp_type, plan_site
from tests.http.web.signin import sign_in_as


def _row(html: str, site_id: int) -> list[str]:
    """The cells of a site's row of the sites table, tags stripped, spaces squeezed."""
    table = html[html.index('id="sites"') : html.index('id="areas-due"')]
    m = re.search(rf'<a href="/app/sites/{site_id}">.*?</tr>', table, re.S)
    assert m, table[:2000]
    cells = re.findall(r"<td[^>]*>(.*?)</td>", m.group(0), re.S)
    return [" ".join(re.sub(r"<[^>]+>", " ", c).split()) for c in cells]


def _due_by_planning(db: Session, site: Site, today: date) -> tuple[int, int, int]:
    """(areas, due within the window, overdue) from the planning service's own site plans."""
    plans = planning.site_plans(db, site, last_relamps=last_group_relamps)
    soon = [
        p
        for p in plans
        if p.due_on is not None and (p.due_on - today).days < overview.DUE_SOON_DAYS
    ]
    return len(plans), len(soon), sum(1 for p in soon if p.first and p.first.overdue)


def test_site_rows_count_open_work_and_relamps_due(client: TestClient, db: Session) -> None:
    busy = plan_site(db, name="Busy Works")
    quiet = plan_site(db, name="Quiet Works")
    lt = plan_lamp_type(db)
    # 400 weeks at 60 h a week is 24,000 h, the rated life: long past any group interval.
    old = plan_area(db, busy, burnout_ceiling=0.05)
    plan_fixtures(db, old, lt, 3, installed_at=utcnow() - timedelta(weeks=400))
    fresh = plan_area(db, busy)  # a week old: its relamp is years away
    plan_fixtures(db, fresh, lt, 3, installed_at=utcnow() - timedelta(weeks=1))
    plan_fixtures(db, plan_area(db, quiet), lt, 2, installed_at=utcnow() - timedelta(weeks=1))
    positions = db.scalars(
        select(LampPosition.id)
        .join(Fixture, Fixture.id == LampPosition.fixture_id)
        .where(Fixture.area_id == fresh.id)
        .order_by(LampPosition.id)
    ).all()
    now = utcnow()
    for pid in positions[:2]:  # two lamps reported dark, still open
        report_burnout(db, position_id=pid, reported_at=now)
    report_burnout(db, position_id=positions[2], reported_at=now, replaced=True)  # closed
    today = now.date()
    # Open orders: one due today (counted as due), one next month; a cancelled one is not open.
    orders.create(db, WorkOrderCreate(area_id=old.id, kind="group_relamp", due_on=today))
    gone = orders.create(db, WorkOrderCreate(area_id=fresh.id, kind="group_relamp"))
    orders.cancel(db, gone.id, CancelBody(reason="not needed"))
    orders.create(
        db, WorkOrderCreate(area_id=fresh.id, kind="group_relamp", due_on=today + timedelta(30))
    )
    db.commit()
    sign_in_as(client, db, "viewer")
    html = client.get("/app").text
    areas, due, overdue = _due_by_planning(db, busy, today)
    assert (areas, due, overdue) == (2, 1, 1)  # the data above is built for this
    burnouts, open_orders, due_orders, relamps, _spend = _row(html, busy.id)
    assert (burnouts, open_orders, due_orders) == ("2", "2", "1 due")
    assert relamps == f"{due} of {areas} areas ({overdue} overdue)"
    assert _row(html, quiet.id)[:4] == ["0", "0", "0", "0 of 1 areas"]
    listed = html[html.index('id="areas-due"') :]
    assert f'href="/app/areas/{old.id}"' in listed and f'href="/app/areas/{fresh.id}"' not in listed


def test_due_list_shows_the_soonest_and_counts_the_rest(
    client: TestClient, db: Session, monkeypatch: pytest.MonkeyPatch
) -> None:
    s = plan_site(db)
    lt = plan_lamp_type(db)
    made = []
    for weeks in (400, 380, 360):  # all past their group interval
        a = plan_area(db, s, burnout_ceiling=0.05)
        plan_fixtures(db, a, lt, 2, installed_at=utcnow() - timedelta(weeks=weeks))
        made.append(a)
    db.commit()
    monkeypatch.setattr(overview, "DUE_ROWS", 2)
    sign_in_as(client, db, "viewer")
    html = client.get("/app").text
    listed = html[html.index('id="areas-due"') :]
    links = re.findall(r'href="/app/areas/(\d+)"', listed)
    assert len(links) == 2 and {int(i) for i in links} <= {a.id for a in made}
    assert "the 2 soonest of 3" in listed
    # The third area is on the site's page, not on the overview.
    assert all(f'href="/app/areas/{a.id}"' in client.get(f"/app/sites/{s.id}").text for a in made)
