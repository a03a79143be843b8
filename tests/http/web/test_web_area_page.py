"""The area page and the overview chart through the app: status, plan words, escaping."""

from __future__ import annotations

import json
import re
from datetime import timedelta

from fastapi.testclient import TestClient
from sqlalchemy.orm import Session

from service.db.base import utcnow
from service.users import service as users
from tests.factories import plan_area, plan_fixtures, plan_lamp_type, plan_site

PASSWORD = "correct horse battery"


def _sign_in(client: TestClient, db: Session, name: str) -> None:
    users.create_user(db, name, name, "viewer", PASSWORD)
    db.commit()
    r = client.post(
        "/sign-in", data={"username": name, "password": PASSWORD}, follow_redirects=False
    )
    assert r.status_code == 303


def _specs(html: str) -> list[dict[str, object]]:
    raw = re.findall(r'<script type="application/json" class="chart-data">(.*?)</script>', html)
    return [json.loads(x) for x in raw]


def test_area_page_plan_and_charts(client: TestClient, db: Session) -> None:
    s = plan_site(db)
    a = plan_area(db, s, name="Hall <script>alert(1)</script>", light_floor=0.7)
    lt = plan_lamp_type(db, code="<b>T8</b>")
    fx = plan_fixtures(db, a, lt, 4, lamps=2, installed_at=utcnow() - timedelta(weeks=30))
    db.commit()
    _sign_in(client, db, "ana")
    r = client.get(f"/app/areas/{a.id}")
    assert r.status_code == 200
    assert "<script>alert(1)" not in r.text and "Hall &lt;script&gt;" in r.text
    assert "<b>T8</b>" not in r.text  # the code is escaped in HTML and in the chart JSON
    assert "\\u003cb\\u003eT8" in r.text
    assert 'id="plan-summary"' in r.text and "burn hours" in r.text
    specs = {str(c["id"]).split("-")[0]: c for c in _specs(r.text)}
    assert set(specs) == {"survival", "light", "cost"}
    assert "(h)" in str(specs["survival"]["x_label"])
    light = specs["light"]["data"]
    assert isinstance(light, list) and light[3][0] == 0.7  # the floor line
    assert "/static/vendor/uplot/uPlot.iife.min.js" in r.text
    assert client.get("/static/vendor/uplot/uPlot.iife.min.js").status_code == 200
    assert client.get("/static/charts.js").status_code == 200
    table = r.text[r.text.index('id="area-fixtures"') :]
    assert all(f"<td>{f.tag}</td>" in table for f in fx)
    # 30 weeks at 60 burn hours a week: the oldest lamp has about 1,800 h.
    ages = [int(x.replace(",", "")) for x in re.findall(r"<td>([\d,]+)</td><td>\d+%</td>", table)]
    assert len(ages) == 4 and all(1700 <= h <= 1900 for h in ages)


def test_area_page_needs_sign_in_and_a_real_area(client: TestClient, db: Session) -> None:
    r = client.get("/app/areas/1", follow_redirects=False)
    assert r.status_code == 303 and r.headers["location"].startswith("/sign-in")
    _sign_in(client, db, "bo")
    assert client.get("/app/areas/999999").status_code == 404


def test_overview_has_weekly_chart_and_due_areas(client: TestClient, db: Session) -> None:
    s = plan_site(db)
    a = plan_area(db, s, burnout_ceiling=0.05)
    lt = plan_lamp_type(db)
    plan_fixtures(db, a, lt, 4, lamps=2, installed_at=utcnow() - timedelta(weeks=400))
    db.commit()
    _sign_in(client, db, "cy")
    r = client.get("/app")
    assert r.status_code == 200
    (weekly,) = [c for c in _specs(r.text) if c["id"] == "weekly-burnouts"]
    data = weekly["data"]
    assert isinstance(data, list) and len(data[0]) == 26
    due = r.text[r.text.index('id="areas-due"') : r.text.index('id="weekly-burnouts"')]
    assert f'href="/app/areas/{a.id}"' in due  # long overdue: listed as due
    assert 'id="all-areas"' not in r.text  # every area is on its site's page, not here


def test_site_page_lists_areas_with_plans(client: TestClient, db: Session) -> None:
    s = plan_site(db, name="Works <i>North</i>")
    a = plan_area(db, s)
    plan_fixtures(
        db, a, plan_lamp_type(db), 3, lamps=2, installed_at=utcnow() - timedelta(weeks=30)
    )
    db.commit()
    _sign_in(client, db, "di")
    r = client.get(f"/app/sites/{s.id}")
    assert r.status_code == 200
    assert "Works &lt;i&gt;North" in r.text and "<i>North" not in r.text
    rows = r.text[r.text.index('id="site-areas"') :]
    assert f'href="/app/areas/{a.id}"' in rows and "<td>6</td>" in rows  # 3 fixtures x 2
    assert client.get("/app/sites/999999").status_code == 404
    assert f'href="/app/sites/{s.id}"' in client.get("/app").text
