"""Crossing dates of a site whose areas are open, crossed already or without limits.

forecasting/crossings.py bisects only the areas whose answer is still open, on their own
positions; the others must keep their answers (now, or none) and the open ones the date of
the closed form. Reference: the Weibull percentile F(t) = 0.2 at t = eta (-ln 0.8)^(1/beta)
(as in test_forecasts.py), for every area holding the same lamps whatever its neighbours.
"""

from __future__ import annotations

import math
from datetime import datetime, timedelta

from fastapi.testclient import TestClient
from sqlalchemy.orm import Session

from tests import factories as fx


def test_open_areas_get_the_closed_form_date_beside_crossed_and_unlimited_ones(
    db: Session, client: TestClient, reader: dict[str, str]
) -> None:
    s = fx.site(db)
    lt = fx.lamp_type(db)
    areas = {
        "open": fx.area(db, s, name="Open", light_floor=0.88, burnout_ceiling=0.2),
        "crossed": fx.area(db, s, name="Crossed", light_floor=0.999, burnout_ceiling=None),
        "none": fx.area(db, s, name="None", light_floor=None, burnout_ceiling=None),
        "ceiling": fx.area(db, s, name="Ceiling", light_floor=0.01, burnout_ceiling=0.2),
    }
    for a in areas.values():
        fx.fixtures(db, a, lt, 3)
    db.commit()
    at = fx.T0 + timedelta(days=20)  # age 240 h, 84 h per week
    r = client.get(f"/api/v1/forecasts/sites/{s.id}", params={"at": at.isoformat()}, headers=reader)
    assert r.status_code == 200, r.text
    by_id = {x["area_id"]: x for x in r.json()["areas"]}
    got = {k: by_id[a.id] for k, a in areas.items()}
    beta, eta = 3.5, 1000.0 / math.log(2.0) ** (1 / 3.5)
    tau = eta * (-math.log(0.8)) ** (1 / beta) - 240.0
    expect = at + timedelta(weeks=tau / 84.0)
    for k in ("open", "ceiling"):
        date = datetime.fromisoformat(got[k]["burnout_ceiling_date"])
        assert abs((date - expect).total_seconds()) < 60, k
    assert got["open"]["burnout_ceiling_date"] == got["ceiling"]["burnout_ceiling_date"]
    assert got["open"]["light_floor_date"] is not None
    assert datetime.fromisoformat(got["crossed"]["light_floor_date"]) == at  # crossed now
    # the same lamps reach the lower floor later (the mean light falls with the hours)
    low = datetime.fromisoformat(got["ceiling"]["light_floor_date"])
    assert low > datetime.fromisoformat(got["open"]["light_floor_date"])
    for k in ("crossed", "none"):
        assert got[k]["burnout_ceiling_date"] is None
    assert got["none"]["light_floor_date"] is None
