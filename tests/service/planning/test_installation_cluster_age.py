"""A plan's group age from clustered installation dates (planning.group_age's rule)."""

from __future__ import annotations

from datetime import UTC, datetime, timedelta

import pytest
from sqlalchemy.orm import Session

from service.planning.schemas import PlanOverrides
from service.planning.service import area_plan
from service.workorders.repository import last_group_relamps
from tests import factories as fx

AT = datetime(2026, 6, 1, 12, 0, tzinfo=UTC)


def test_a_pre_service_group_relamp_sets_the_group_age(db: Session) -> None:
    s = fx.site(db)
    lt = fx.lamp_type(db, rated_life_h=6000.0)
    a = fx.area(db, s)  # 84 burn hours a week
    fx.fixtures(db, a, lt, 8, installed_at=AT - timedelta(weeks=30), tag="G")
    fx.fixtures(db, a, lt, 2, installed_at=AT - timedelta(weeks=2), tag="S")  # spot replaced
    db.commit()
    plan = area_plan(db, a.id, PlanOverrides(at=AT), last_relamps=last_group_relamps)
    assert plan.group_age_basis == "installation_dates"
    (g,) = plan.groups
    # 8 of 10 (80 %) went in together: their 30 weeks x 84 h, not the mean of all ten.
    assert g.group_age_h == pytest.approx(30 * 84.0, abs=1e-6)


def test_spread_installation_dates_keep_the_mean_position_age(db: Session) -> None:
    s = fx.site(db)
    lt = fx.lamp_type(db, rated_life_h=6000.0)
    a = fx.area(db, s)
    for i, weeks in enumerate((2, 6, 10, 14, 18, 22)):
        fx.fixtures(db, a, lt, 1, installed_at=AT - timedelta(weeks=weeks), tag=f"F{i}-")
    db.commit()
    plan = area_plan(db, a.id, PlanOverrides(at=AT), last_relamps=last_group_relamps)
    assert plan.group_age_basis == "mean_position_age"
    # Mean of 2..22 weeks in steps of 4 (12 weeks) at 84 h a week.
    assert plan.groups[0].group_age_h == pytest.approx(12 * 84.0, abs=1e-6)
