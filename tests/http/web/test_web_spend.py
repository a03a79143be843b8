"""The overview's "spent this year" per site, from completed orders priced as the budget does."""

from __future__ import annotations

import re
from datetime import timedelta

from fastapi.testclient import TestClient
from sqlalchemy.orm import Session

from service.db.base import utcnow
from service.workorders import service as orders
from service.workorders.models import LineOutcome
from service.workorders.schemas import CompleteBody, FixtureOutcome, WorkOrderCreate
from tests import factories as fx
from tests.http.web.signin import sign_in_as


def _spend_cell(html: str, site_id: int) -> str:
    m = re.search(rf'<td class="spend" data-site="{site_id}">(.*?)</td>', html, re.S)
    assert m, html[:2000]
    return " ".join(m.group(1).split())


def test_overview_shows_this_years_spend(client: TestClient, db: Session) -> None:
    site = fx.site(db, "Spend Works", disposal_fee_per_mercury_lamp=0.5)
    idle = fx.site(db, "Idle Works")
    area = fx.area(
        db,
        site,
        group_minutes_per_lamp=4.0,
        spot_minutes_per_lamp=30.0,
        equipment_hire_per_visit=150.0,
    )
    fx.area(db, idle)
    lt = fx.lamp_type(
        db,
        "T8-SPEND",
        technology="linear_fluorescent",
        rated_life_h=24_000.0,
        weibull_shape=4.0,
        life_exponent=None,
        unit_price=4.0,
        contains_mercury=True,
    )
    fixtures = fx.fixtures(db, area, lt, 3, lamps=2, installed_at=utcnow() - timedelta(weeks=30))
    order = orders.create(db, WorkOrderCreate(area_id=area.id, kind="group_relamp"))
    orders.issue(db, order.id)
    orders.start(db, order.id)
    skipped = FixtureOutcome(
        fixture_id=fixtures[0].id, outcome=LineOutcome.SKIPPED, reason="blocked by racking"
    )
    orders.complete(db, order.id, CompleteBody(outcomes=[skipped], others=LineOutcome.REPLACED))
    db.commit()
    sign_in_as(client, db, "viewer")
    html = client.get("/app").text
    # Hand-priced from the inputs above, the way the plan prices a group relamp per lamp
    # (lamp + group minutes x labour rate + mercury disposal) plus one equipment hire for
    # the visit: 4 lamps fitted (one fixture of two lamps skipped), labour 40/h (factories).
    expected = 4 * (4.0 + 4.0 / 60.0 * 40.0 + 0.5) + 150.0
    cell = _spend_cell(html, site.id)
    assert cell.startswith(f"{expected:,.2f} EUR"), cell
    assert "1 orders done, 4 lamps" in cell
    assert _spend_cell(html, idle.id).startswith("0.00 EUR")
