"""Chart data for the pages: weekly expected burnouts, cost-rate points, JSON-safe numbers."""

from __future__ import annotations

from datetime import timedelta

import numpy as np
import pytest
from sqlalchemy.orm import Session

from service.db.base import utcnow
from service.forecasting import service as forecasting
from service.planning import service as planning
from service.web import charts
from service.workorders.repository import last_group_relamps
from tests.factories import plan_area, plan_fixtures, plan_lamp_type, plan_site


def test_weekly_burnouts_exponential_lamps_are_a_poisson_stream(db: Session) -> None:
    """Weibull shape 1: renewals form a Poisson process, M(t) = t/eta (Cox, Renewal Theory,
    section 1.2), so every week expects burn_h_per_week / eta burnouts per position,
    whatever the lamp's age (memorylessness)."""
    s = plan_site(db)
    a = plan_area(db, s)
    lt = plan_lamp_type(db, weibull_shape=1.0, code="EXP-1")
    now = utcnow()
    plan_fixtures(db, a, lt, 3, lamps=2, installed_at=now - timedelta(weeks=40))
    plan_fixtures(db, a, lt, 2, lamps=1, installed_at=now - timedelta(weeks=2))
    db.flush()
    today = now.date()
    spec = charts.weekly_burnouts(db, now, [today + timedelta(days=17)], today)
    assert spec is not None
    assert spec["data"][0] == list(range(1, 27))
    weekly = np.array(spec["data"][1], dtype=float)
    eta = forecasting.forecast(db, area_id=a.id, at=now).positions.fleet.scale_h
    assert np.allclose(eta, eta[0])  # one operating point for all positions
    expected = 8 * a.weekly_burn_hours / float(eta[0])  # 8 positions
    assert weekly == pytest.approx(np.full(26, expected), rel=2e-3)
    # The relamp due in 17 days falls in week 3 (index 2), and only there.
    marks = spec["data"][2]
    assert marks[2] == 1 and sum(1 for m in marks if m is not None) == 1
    assert spec["series"][-1]["points_only"] is True


def test_no_positions_no_chart(db: Session) -> None:
    now = utcnow()
    assert charts.weekly_burnouts(db, now, [], now.date()) is None


def test_cost_chart_marks_the_chosen_interval_on_the_curve(db: Session) -> None:
    s = plan_site(db)
    a = plan_area(db, s, equipment_hire_per_visit=300.0, spot_minutes_per_lamp=45.0)
    lt = plan_lamp_type(db, weibull_shape=4.0)
    plan_fixtures(db, a, lt, 20, lamps=2, installed_at=utcnow() - timedelta(weeks=30))
    db.flush()
    plan = planning.area_plan(db, a.id, last_relamps=last_group_relamps)
    (g,) = plan.groups
    spec = charts.cost_chart(g, lt.code, "EUR")
    x, c_t, spot, chosen = spec["data"]
    assert g.group.plan.interval_h is not None
    (i,) = [k for k, v in enumerate(chosen) if v is not None]
    assert x[i] == pytest.approx(g.group.plan.interval_h, rel=1e-5)
    assert chosen[i] == pytest.approx(g.group.plan.cost_rate * 1000, rel=1e-5)
    assert x == sorted(x) and len(x) <= charts.COST_POINTS + 1
    # No cap binds here, so the marked point is the curve's lowest (Brent-refined) point.
    assert g.group.plan.binding == "cost_optimum"
    assert chosen[i] == pytest.approx(min(v for v in c_t if v is not None), rel=1e-6)
    assert spot[0] == pytest.approx(g.group.plan.spot_only_rate * 1000, rel=1e-5)


def test_numbers_are_json_safe() -> None:
    spec = charts.chart(
        "c",
        "t",
        "x (h)",
        "y (-)",
        [0.0, 1.0, 2.0],
        [charts.Series("s", [float("nan"), float("inf"), 1.23456789])],
    )
    assert spec["data"] == [[0.0, 1.0, 2.0], [None, None, 1.23457]]
    assert spec["series"][0]["dash"] == []
