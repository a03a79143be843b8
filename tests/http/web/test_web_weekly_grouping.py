"""The overview's weekly burnout chart: grouping alike positions keeps the per-position sums."""

from __future__ import annotations

from datetime import timedelta

import numpy as np
from sqlalchemy.orm import Session

from service.db.base import utcnow
from service.forecasting.fit import load_fitted_types
from service.forecasting.spot_replacements import expected_replacements
from service.readings.ages import position_ages
from service.reliability.fleet import evaluate_fleet
from service.web import charts
from tests.factories import plan_area, plan_fixtures, plan_lamp_type, plan_site


def _per_position(db: Session, at: object, weeks: int) -> np.ndarray:
    """Expected burnouts per week summed over every position, one renewal call per position."""
    ages = position_ages(db, at=at)  # type: ignore[arg-type]
    types = load_fitted_types(db, ages.lamp_type_id, ballast_kinds=ages.ballast_kind)
    k = types.index(ages.lamp_type_id, ages.ballast_kind)
    age = np.where(ages.burned_out, 0.0, ages.age_h)
    scale = evaluate_fleet(types.table, k, age, ages.voltage_v, ages.hours_per_start, 0.0).scale_h
    cum = np.zeros(weeks + 1)
    for w in range(1, weeks + 1):
        cum[w] = expected_replacements(
            types.table.shape, k, scale, age, w * ages.burn_h_per_week
        ).sum()
    return np.diff(cum)


def test_grouped_weekly_chart_matches_per_position_sums(db: Session) -> None:
    s = plan_site(db)
    a = plan_area(db, s)
    lt = plan_lamp_type(db)
    for volts, weeks_ago in ((221.3, 80), (229.9, 80), (236.4, 30), (None, 5)):
        plan_fixtures(
            db, a, lt, 4, lamps=2, volts=volts, installed_at=utcnow() - timedelta(weeks=weeks_ago)
        )
    db.commit()
    now = utcnow()
    spec = charts.weekly_burnouts(db, now, [], now.date(), weeks=26)
    assert spec is not None
    got = np.array(spec["data"][1], dtype=float)  # the one lamp type's weekly series
    # Reference: the same numeric core evaluated position by position, week by week.
    want = _per_position(db, now, 26)
    assert want.sum() > 0
    np.testing.assert_allclose(got, want, rtol=2e-3, atol=1e-9)
