"""Relamp plans over the API, checked against the numeric core with the same inputs."""

from __future__ import annotations

import math
from datetime import UTC, date, datetime, timedelta

import numpy as np
import pytest
from fastapi.testclient import TestClient
from scipy.interpolate import PchipInterpolator
from sqlalchemy import func, select
from sqlalchemy.orm import Session

from service.events import burnouts
from service.register.models import LampPosition
from service.reliability import weibull
from service.reliability.conditions import switching_life_factor, voltage_effect
from service.reliability.replacement import plan_block_replacement
from service.reliability.weibull import Weibull
from service.workorders.models import WorkOrder
from tests import factories as fx
from tests.factories import plan_area, plan_fixtures, plan_lamp_type, plan_site

AT = datetime(2026, 6, 1, 20, 0, tzinfo=UTC)
# The default linear fluorescent lumen curve's knots (service/reliability/lumen.py, [memory]).
KNOTS_H = [0.0, 1200.0, 9600.0, 16800.0, 24000.0]
KNOTS_F = [1.0, 0.97, 0.93, 0.9, 0.87]  # 2 June 08:00 in Auckland


def _setup(db: Session, **area_over: object) -> tuple[int, int]:
    s = plan_site(db, time_zone="Pacific/Auckland")
    lt = plan_lamp_type(db, ballast_behaviour="reactor")
    a = plan_area(db, s, **area_over)
    plan_fixtures(db, a, lt, 10, lamps=2, installed_at=AT - timedelta(weeks=10), volts=240.0)
    db.commit()
    return a.id, lt.id


def test_interval_matches_the_numeric_core(
    client: TestClient, db: Session, reader: dict[str, str]
) -> None:
    area_id, _ = _setup(db)
    r = client.post(
        f"/api/v1/areas/{area_id}/relamp-plan", json={"at": AT.isoformat()}, headers=reader
    )
    assert r.status_code == 200, r.text
    plan = r.json()
    (lt,) = plan["lamp_types"]
    inp = lt["inputs"]
    assert inp["voltage_v"] == pytest.approx(240.0)
    hps = 60.0 / 7.0  # 60 burn hours a week, one start a day
    assert inp["hours_per_start"] == pytest.approx(hps)
    # Same inputs straight into the numeric core: IES B50 rated life -> Weibull scale,
    # reactor ballast voltage factor, switching factor, then the block replacement optimum.
    base = Weibull.from_rated_life(24_000.0, 5.0, 50.0)
    fv = voltage_effect(240.0, 230.0, "linear_fluorescent", "reactor").life_factor
    fs = float(switching_life_factor(hps, 3.0)[0])
    life = Weibull(5.0, base.scale * fv * fs)
    # lamp + group labour + hire share + disposal (by default the relamp does not clean:
    # the area's own cleaning round does, so no cleaning labour on the group visit)
    c_group = 4.0 + 4.0 / 60.0 * 40.0 + 0.0 + 0.5
    c_spot = 4.0 + 30.0 / 60.0 * 40.0 + 0.0 + 0.5
    core = plan_block_replacement(life, c_group, c_spot)
    assert inp["c_group"] == pytest.approx(c_group) and inp["c_spot"] == pytest.approx(c_spot)
    assert core.interval_h is not None
    assert lt["interval_h"] == pytest.approx(core.interval_h, rel=1e-9)
    assert lt["binding"] == core.binding == "cost_optimum"
    assert lt["cost_rate"] == pytest.approx(core.cost_rate, rel=1e-9)
    assert lt["spot_only_rate"] == pytest.approx(c_spot / life.mean(), rel=1e-9)
    # Yearly saving: per position-hour saving x burn hours a year x positions.
    assert lt["yearly_saving"] == pytest.approx(core.saving_rate * 60 * 365.25 / 7 * 20, rel=1e-9)
    # Due date: remaining burn hours / 60 h a week, from the Auckland calendar date.
    age = 10 * 60.0
    assert plan["group_age_h"] == pytest.approx(age, abs=1e-6)
    days = math.floor((core.interval_h - age) / 60.0 * 7.0)
    assert plan["due_on"] == (date(2026, 6, 2) + timedelta(days=days)).isoformat()
    assert plan["overdue"] is False


def test_light_floor_binds_at_the_lumen_curve_crossing(
    client: TestClient, db: Session, reader: dict[str, str]
) -> None:
    # Dustproof luminaires in a very clean room, cleaned every half month: the dirt is
    # negligible here (CIE 97:2005 LMF >= 0.998, recalled from memory), and at 230 V the
    # voltage light factor is 1, so the lamp's own curve sets the floor.
    area_id, _ = _setup(
        db,
        light_floor=0.9,
        luminaire_type="dustproof",
        dirt_environment="very_clean",
        cleaning_interval_months=0.5,
        cleaning_minutes_per_fixture=0.0,
        relamp_includes_cleaning=True,  # the dirt cycle restarts at the relamp
    )
    # Dearer group labour pushes the cost optimum past the floor.
    body = {"group_minutes_per_lamp": 12.0, "voltage_v": 230.0}
    r = client.post(f"/api/v1/areas/{area_id}/relamp-plan", json=body, headers=reader)
    (lt,) = r.json()["lamp_types"]
    assert lt["unconstrained_optimum_h"] > lt["inputs"]["light_floor_h"]
    assert lt["binding"] == "light_floor"
    # The default fluorescent curve passes through its knot (70 % of rated life, 0.90):
    # PCHIP interpolation goes through the data points (scipy PchipInterpolator). The
    # half-month dirt (CIE 97:2005 type E very clean: 0.98 at 0.5 years, recalled from
    # memory, so 0.04 a year from 1) takes at most 0.0017 off and moves the crossing earlier.
    h = lt["inputs"]["light_floor_h"]
    assert 0.97 * 0.7 * 24_000 < h < 0.7 * 24_000
    years = h / (60.0 * 365.25 / 7.0)
    lmf = 1.0 - 0.04 * (years % (0.5 / 12.0))
    lld = float(PchipInterpolator(KNOTS_H, KNOTS_F)(h))
    assert lld * lmf == pytest.approx(0.9, abs=3e-4)
    assert lt["interval_h"] == pytest.approx(lt["inputs"]["light_floor_h"], rel=1e-6)


def test_rupture_cap_and_spot_only(client: TestClient, db: Session, reader: dict[str, str]) -> None:
    s = plan_site(db)
    mh = plan_lamp_type(
        db, technology="metal_halide", rated_life_h=15_000.0, weibull_shape=4.0, rupture_risk=True
    )
    a = plan_area(db, s)
    plan_fixtures(db, a, mh, 4, lamps=1, volts=230.0)
    db.commit()
    url = f"/api/v1/areas/{a.id}/relamp-plan"
    # Group labour nearly as dear as spot: cost alone would not group, the cap forces it
    # (common practice: metal halide relamped as a group near 70 % of rated life).
    body = {"hours_per_start": 10.0, "group_minutes_per_lamp": 29.0}
    (lt,) = client.post(url, json=body, headers=reader).json()["lamp_types"]
    assert lt["binding"] == "rupture_cap"
    assert lt["inputs"]["rupture_cap_h"] == pytest.approx(0.7 * 15_000)
    assert lt["interval_h"] == pytest.approx(0.7 * 15_000)
    assert lt["safety_premium_rate"] >= 0.0

    fl = plan_lamp_type(db)
    a2 = plan_area(db, s)
    plan_fixtures(db, a2, fl, 2)
    db.commit()
    body = {"group_minutes_per_lamp": 30.0}  # group costs as much as spot: never pays
    plan = client.post(f"/api/v1/areas/{a2.id}/relamp-plan", json=body, headers=reader).json()
    assert plan["binding"] == "spot_only" and plan["interval_h"] is None
    assert plan["due_on"] is None and plan["lamp_types"][0]["yearly_saving"] == 0.0


def test_what_if_changes_nothing_stored(
    client: TestClient, db: Session, reader: dict[str, str]
) -> None:
    area_id, _ = _setup(db)
    url = f"/api/v1/areas/{area_id}/relamp-plan"
    before = client.get(url, headers=reader).json()
    what_if = client.post(url, json={"lamp_price": 40.0, "voltage_v": 230.0}, headers=reader)
    assert what_if.status_code == 200
    wi = what_if.json()["lamp_types"][0]
    assert wi["inputs"]["lamp_price"] == 40.0 and wi["inputs"]["voltage_basis"] == "override"
    assert wi["interval_h"] != before["lamp_types"][0]["interval_h"]
    after = client.get(url, headers=reader).json()
    assert after["lamp_types"][0]["interval_h"] == before["lamp_types"][0]["interval_h"]
    assert after["lamp_types"][0]["inputs"] == before["lamp_types"][0]["inputs"]
    assert db.scalar(select(func.count()).select_from(WorkOrder)) == 0


def test_site_plan_lists_areas_by_due_date(
    client: TestClient, db: Session, reader: dict[str, str]
) -> None:
    s = plan_site(db)
    lt = plan_lamp_type(db)
    young = plan_area(db, s)
    old = plan_area(db, s)
    plan_fixtures(db, young, lt, 3)
    plan_fixtures(db, old, lt, 3, hours_at_install=12_000.0)
    db.commit()
    r = client.get(f"/api/v1/sites/{s.id}/relamp-plan", headers=reader)
    assert r.status_code == 200
    areas = r.json()["areas"]
    assert [x["area_id"] for x in areas] == [old.id, young.id]
    assert areas[0]["due_on"] < areas[1]["due_on"]


def test_bad_overrides_and_unknown_area(
    client: TestClient, db: Session, reader: dict[str, str]
) -> None:
    area_id, _ = _setup(db)
    r = client.post(
        f"/api/v1/areas/{area_id}/relamp-plan",
        json={"light_floor": 1.5, "colour": "red"},
        headers=reader,
    )
    assert r.status_code == 422
    assert {e["field"] for e in r.json()["errors"]} == {"light_floor", "colour"}
    assert client.get("/api/v1/areas/999999/relamp-plan", headers=reader).status_code == 404
    assert client.get(f"/api/v1/areas/{area_id}/relamp-plan").status_code == 401


def test_plan_uses_the_field_fit_the_forecasts_use(
    db: Session, client: TestClient, reader: dict[str, str]
) -> None:
    """With enough recorded burnouts the plan and the forecasts share one life curve."""
    s = fx.site(db)
    a = fx.area(db, s)
    lt = fx.lamp_type(db)
    fx.fixtures(db, a, lt, 30)
    db.commit()
    positions = db.query(LampPosition).order_by(LampPosition.id).all()
    hours = np.sort(weibull.percentile(np.linspace(0.05, 0.95, 24), 3.0, 900.0))
    at = fx.T0 + timedelta(days=100)
    for p, h in zip(positions[:24], hours, strict=True):
        burnouts.report_burnout(
            db, position_id=p.id, reported_at=at, burn_hours=float(h), replaced=True
        )
    db.commit()
    fit = client.get(f"/api/v1/field-fits/lamp-types/{lt.id}", headers=reader).json()
    assert fit["forecasts_use"]["method"] == "field"
    plan = client.get(f"/api/v1/areas/{a.id}/relamp-plan", headers=reader).json()
    inputs = plan["lamp_types"][0]["inputs"]
    assert inputs["life_curve"] == "field"
    assert inputs["weibull_shape"] == pytest.approx(fit["forecasts_use"]["shape"], rel=1e-6)
    # The curve's scale at rated conditions times this area's voltage and switching factors;
    # lamps in service are censored at their age "now", a few ms apart between the requests.
    factor = inputs["voltage_life_factor"] * inputs["switching_life_factor"]
    assert inputs["weibull_scale_h"] == pytest.approx(
        fit["forecasts_use"]["scale_h"] * factor, rel=1e-6
    )
    # And the interval is the numeric core's for that curve and those costs.
    ref = plan_block_replacement(
        Weibull(inputs["weibull_shape"], inputs["weibull_scale_h"]),
        inputs["c_group"],
        inputs["c_spot"],
        light_floor_h=inputs["light_floor_h"],
        burnout_ceiling=inputs["burnout_ceiling"],
        rupture_cap_h=inputs["rupture_cap_h"],
    )
    got = plan["lamp_types"][0]["interval_h"]
    if ref.interval_h is None:
        assert got is None
    else:
        assert got == pytest.approx(ref.interval_h, rel=1e-4)


@pytest.mark.parametrize(
    "body",
    [
        {"voltage_v": 1.0},  # life stretched beyond any calendar: no due date, no overflow
        {"weekly_burn_hours": 0.01},
        {"voltage_v": 1.0, "objective": "cost_per_megalumen_hour"},
        {"hours_per_start": 0.01, "light_floor": 0.99, "burnout_ceiling": 0.001},
    ],
)
def test_extreme_what_if_answers_without_error(
    client: TestClient, db: Session, reader: dict[str, str], body: dict[str, object]
) -> None:
    area_id, _ = _setup(db)
    r = client.post(f"/api/v1/areas/{area_id}/relamp-plan", json=body, headers=reader)
    assert r.status_code == 200, r.text
    plan = r.json()
    if plan["due_on"] is not None:
        assert date.fromisoformat(plan["due_on"]).year < 2200


@pytest.mark.parametrize(
    ("field", "value"),
    [("voltage_v", 1e-300), ("voltage_v", 0.5), ("lamp_price", 1e12), ("weekly_burn_hours", 0)],
)
def test_what_if_out_of_range_is_422_naming_the_field(
    client: TestClient, db: Session, reader: dict[str, str], field: str, value: float
) -> None:
    area_id, _ = _setup(db)
    r = client.post(f"/api/v1/areas/{area_id}/relamp-plan", json={field: value}, headers=reader)
    assert r.status_code == 422 and r.json()["errors"][0]["field"] == field
