"""QR label sheets and the short report URL (tags with '/'), and the weekly runs page."""

from __future__ import annotations

import re
from datetime import timedelta

import segno
from fastapi.testclient import TestClient
from sqlalchemy import func, select
from sqlalchemy.orm import Session

from service.db.base import utcnow
from service.scheduling.models import WeeklyRun
from service.web.fixture_pages import report_path
from service.workorders.models import WorkOrder
from tests.factories import plan_area, plan_fixtures, plan_lamp_type, plan_site
from tests.http.web.signin import sign_in_as


def test_label_sheet_encodes_each_fixture_report_url(client: TestClient, db: Session) -> None:
    s = plan_site(db)
    a = plan_area(db, s)
    fx1, fx2 = plan_fixtures(db, a, plan_lamp_type(db), 2, lamps=2)
    fx2.tag = "B2/07"  # tags may hold a slash
    db.commit()
    sign_in_as(client, db, "viewer")
    r = client.get(f"/app/areas/{a.id}/labels")
    assert r.status_code == 200
    assert r.text.count("<svg") == 2 and r.text.count('class="label"') == 2
    url = f"http://testserver/f/{s.id}/B2/07"
    assert url in r.text
    # The drawn code is the one segno makes for that URL (same modules, same path data).
    expected = segno.make(url, error="m").svg_inline(scale=3, title="B2/07")
    assert re.search(r'd="([^"]+)"', expected).group(1) in r.text  # type: ignore[union-attr]
    # The short URL opens the fixture's report page, slash and all.
    page = client.get(report_path(s.id, "B2/07"))
    assert page.status_code == 200 and "Fixture B2/07" in page.text
    encoded = client.get(f"/f/{s.id}/B2%2F07")
    assert encoded.status_code == 200 and "Fixture B2/07" in encoded.text
    assert client.get(f"/f/{s.id}/{fx1.tag}").status_code == 200
    assert client.get(f"/f/{s.id}/nope/none").status_code == 404
    assert client.get("/app/areas/999999/labels").status_code == 404


def test_label_sheet_needs_sign_in(client: TestClient, db: Session) -> None:
    r = client.get("/app/areas/1/labels", follow_redirects=False)
    assert r.status_code == 303 and r.headers["location"].startswith("/sign-in")


def _runs(db: Session, site_id: int) -> int:
    stmt = select(func.count()).select_from(WeeklyRun).where(WeeklyRun.site_id == site_id)
    return int(db.scalar(stmt) or 0)


def test_runs_page_start_now_by_role_and_repeat(client: TestClient, db: Session) -> None:
    s = plan_site(db)
    a = plan_area(db, s)
    plan_fixtures(
        db, a, plan_lamp_type(db), 3, lamps=2, installed_at=utcnow() - timedelta(weeks=300)
    )
    db.commit()
    for role in ("viewer", "technician"):
        token = sign_in_as(client, db, role)
        html = client.get("/app/runs").text
        assert 'id="start-run"' not in html
        r = client.post("/app/runs", data={"csrf_token": token, "site_id": str(s.id)})
        assert r.status_code == 403
    assert _runs(db, s.id) == 0
    token = sign_in_as(client, db, "planner")
    assert 'id="start-run"' in client.get("/app/runs").text
    r = client.post("/app/runs", data={"csrf_token": token, "site_id": str(s.id)})
    assert r.status_code == 200 and "finished; its line is below" in r.text
    db.expire_all()
    assert _runs(db, s.id) == 1
    orders = db.scalar(select(func.count()).select_from(WorkOrder).where(WorkOrder.site_id == s.id))
    # Started again the same week: a second run record, but no order twice.
    r = client.post("/app/runs", data={"csrf_token": token, "site_id": str(s.id)})
    assert r.status_code == 200
    db.expire_all()
    again = db.scalar(select(func.count()).select_from(WorkOrder).where(WorkOrder.site_id == s.id))
    assert again == orders
    html = client.get("/app/runs").text
    assert s.name in html and "Isolate and lock off the power" in html
    r = client.post("/app/runs", data={"csrf_token": "", "site_id": str(s.id)})
    assert r.status_code == 403
    assert (
        client.post("/app/runs", data={"csrf_token": token, "site_id": "999999"}).status_code == 404
    )


def test_cautions_on_every_page_where_a_person_acts(client: TestClient, db: Session) -> None:
    s = plan_site(db)
    a = plan_area(db, s)
    (fx,) = plan_fixtures(db, a, plan_lamp_type(db), 1, lamps=1)
    db.commit()
    sign_in_as(client, db, "planner")
    for url in (
        "/app",
        "/app/report",
        f"/f/{s.id}/{fx.tag}",
        f"/app/areas/{a.id}",
        f"/app/areas/{a.id}/labels",
        "/app/fixtures/new",
        f"/app/fixtures/{fx.id}/edit",
        "/app/fixtures/import",
        "/app/runs",
    ):
        html = client.get(url).text
        assert "Isolate and lock off the power" in html, url
        assert "mercury" in html and "UV" in html and "local codes" in html, url
