"""Forecast, curve and field-fit endpoints against the numeric core and closed forms."""

from __future__ import annotations

import math
from datetime import datetime, timedelta
from typing import Any

import numpy as np
import pytest
from fastapi.testclient import TestClient
from sqlalchemy.orm import Session

from service.events import burnouts
from service.readings.ages import position_ages
from service.register.models import LampPosition
from service.reliability import weibull
from service.reliability.fitting import fit_weibull, kaplan_meier
from service.reliability.fleet import LampTypeSpec, LampTypeTable, evaluate_fleet
from service.reliability.lumen import default_lumen_curve
from service.reliability.renewal import weibull_renewal
from tests import factories as fx

T0 = fx.T0
YEAR = T0 + timedelta(days=365)


def _get(client: TestClient, url: str, headers: dict[str, str], **params: Any) -> Any:
    r = client.get(url, params=params, headers=headers)
    assert r.status_code == 200, r.text
    return r.json()


def test_over_voltage_area_burns_out_faster_by_the_power_law(
    db: Session, client: TestClient, writer: dict[str, str], reader: dict[str, str]
) -> None:
    s = fx.site(db)
    hot = fx.area(db, s, "Hot circuit")
    cool = fx.area(db, s, "Rated circuit")
    # Shape 1 (constant hazard): expected replacements in a window w are w / eta whatever
    # the age [Cox, Renewal Theory: exponential renewal], so the ratio of the two areas is
    # exactly the life factor ratio (241.5 / 230)^13 = 1.05^13 = 1.8856 (inverse power law).
    lt = fx.lamp_type(db, weibull_shape=1.0)
    fx.fixtures(db, hot, lt, 10, lamps=2, tag="H")
    fx.fixtures(db, cool, lt, 10, lamps=2, tag="C")
    db.commit()
    rows = [
        {"area_id": a.id, "day": (T0 + timedelta(days=d)).date().isoformat(), "hours": 12.0}
        for a in (hot, cool)
        for d in range(365)
    ]
    r = client.post("/api/v1/burn-hours/bulk", json=rows, headers=writer)
    assert r.status_code == 201 and r.json()["stored"] == 730
    for a, v in ((hot, 241.5), (cool, 230.0)):
        r = client.post(
            "/api/v1/voltage-readings",
            json={"area_id": a.id, "measured_at": T0.isoformat(), "volts": v},
            headers=writer,
        )
        assert r.status_code == 201
    got = {
        a.id: _get(
            client,
            f"/api/v1/forecasts/areas/{a.id}",
            reader,
            horizon_weeks=4,
            at=YEAR.isoformat(),
            positions="true",
        )
        for a in (hot, cool)
    }
    pos = got[hot.id]["positions"][0]
    assert pos["age_h"] == pytest.approx(365 * 12.0)
    assert pos["voltage_source"] == "readings_weighted" and pos["voltage_v"] == 241.5
    n_hot = got[hot.id]["summary"]["expected_burnouts_spot"]
    n_cool = got[cool.id]["summary"]["expected_burnouts_spot"]
    assert n_hot / n_cool == pytest.approx(1.05**13, rel=1e-3)
    eta = 1000.0 / math.log(2.0)  # B50 1,000 h with shape 1
    w = 4 * 84.0
    assert n_cool == pytest.approx(20 * w / eta, rel=1e-3)
    site = _get(
        client, f"/api/v1/forecasts/sites/{s.id}", reader, horizon_weeks=4, at=YEAR.isoformat()
    )
    assert site["summary"]["expected_burnouts_spot"] == pytest.approx(n_hot + n_cool, rel=1e-9)
    assert site["time_zone"] == "Europe/Lisbon" and len(site["areas"]) == 2


def test_fixture_forecast_equals_the_numeric_core(
    db: Session, client: TestClient, reader: dict[str, str]
) -> None:
    s = fx.site(db)
    a = fx.area(db, s)
    lt = fx.lamp_type(db)  # incandescent, B50 1,000 h, beta 3.5, n = 13
    old = fx.fixtures(db, a, lt, 1, lamps=3, tag="O", measured_voltage_v=236.0)[0]
    at = T0 + timedelta(days=40)  # 480 burn hours by schedule
    new = fx.fixtures(db, a, lt, 1, lamps=1, tag="N", installed_at=at)[0]
    db.commit()
    body = _get(
        client, f"/api/v1/forecasts/fixtures/{old.id}", reader, horizon_weeks=6, at=at.isoformat()
    )
    ages = position_ages(db, fixture_id=old.id, at=at)
    # An independent type table from the core's own spec builder (technology defaults).
    table = LampTypeTable.from_specs(
        [LampTypeSpec("incandescent", 1000.0, 230.0, shape=3.5, life_exponent=13.0)]
    )
    # Luminaire dirt: the area's default regime (enclosed, clean, yearly cleaning), with no
    # cleaning date: assumed half an interval ago. CIE 97:2005 LMF table, type D clean:
    # 0.93 at 0.5 years, 0.87 at 1 year (recalled from memory), linear in between.
    y_end = 0.5 + 6.0 / (365.25 / 7.0)
    lmf = [0.93, 0.93 + (0.87 - 0.93) * (y_end - 0.5) / 0.5]
    core = evaluate_fleet(
        table,
        np.zeros(3, dtype=np.int64),
        ages.age_h,
        236.0,
        np.nan,
        6 * 84.0,
        luminaire_factor=lmf[0],
        luminaire_factor_end=lmf[1],
    )
    got = body["positions"]
    assert [p["age_h"] for p in got] == pytest.approx([480.0] * 3)
    assert [p["survival"] for p in got] == pytest.approx(core.survival.tolist(), rel=1e-12)
    assert [p["p_fail_horizon"] for p in got] == pytest.approx(
        core.p_fail_horizon.tolist(), rel=1e-12
    )
    assert [p["lumen_fraction"] for p in got] == pytest.approx(
        core.lumen_fraction.tolist(), rel=1e-12
    )
    assert [p["lumen_fraction_end"] for p in got] == pytest.approx(
        core.lumen_fraction_end.tolist(), rel=1e-12
    )
    assert body["summary"]["expected_failures_no_replacement"] == pytest.approx(
        core.expected_failures_horizon
    )
    # A lamp put in now: expected spot replacements = renewal function M(w) of a new lamp.
    fresh = _get(
        client, f"/api/v1/forecasts/fixtures/{new.id}", reader, horizon_weeks=20, at=at.isoformat()
    )
    eta = 1000.0 / math.log(2.0) ** (1 / 3.5)
    m = weibull_renewal(3.5, eta, 2000.0).at(20 * 84.0)
    assert fresh["summary"]["expected_burnouts_spot"] == pytest.approx(float(m), rel=1e-3)


def test_burnout_ceiling_and_light_floor_dates(
    db: Session, client: TestClient, reader: dict[str, str]
) -> None:
    s = fx.site(db)
    a = fx.area(db, s, light_floor=0.88, burnout_ceiling=0.2)
    lt = fx.lamp_type(db)
    fx.fixtures(db, a, lt, 4)
    db.commit()
    at = T0 + timedelta(days=20)  # age 240 h, 84 h per week
    body = _get(client, f"/api/v1/forecasts/areas/{a.id}", reader, at=at.isoformat())
    area = body["areas"][0]
    beta, eta = 3.5, 1000.0 / math.log(2.0) ** (1 / 3.5)
    # Weibull percentile (closed form): F(t) = 0.2 at t = eta (-ln 0.8)^(1/beta).
    tau = eta * (-math.log(0.8)) ** (1 / beta) - 240.0
    expect = at + timedelta(weeks=tau / 84.0)
    got = datetime.fromisoformat(area["burnout_ceiling_date"])
    assert abs((got - expect).total_seconds()) < 60
    assert got.utcoffset() is not None
    # Light floor on maintained light: the default filament lumen curve (fraction of the
    # median life) x the luminaire factor is 0.88 there. Dirt: the default regime (enclosed,
    # clean, yearly cleaning, assumed cleaned half a year ago); CIE 97:2005 LMF table, type D
    # clean: 0.93 at 0.5 years, 0.87 at 1 year (recalled from memory), linear in between.
    floor_at = datetime.fromisoformat(area["light_floor_date"])
    weeks = (floor_at - at).total_seconds() / 3600 / 168
    hours = 240.0 + weeks * 84.0
    years = 0.5 + weeks / (365.25 / 7.0)
    assert years < 1.0  # before the next cleaning
    lmf = 0.93 + (0.87 - 0.93) * (years - 0.5) / 0.5
    curve = default_lumen_curve("incandescent")
    lld = float(curve.at(hours, eta * math.log(2.0) ** (1 / beta)))
    assert lld * lmf == pytest.approx(0.88, abs=1e-6)


def test_what_if_curve_matches_weibull_and_renewal(
    db: Session, client: TestClient, reader: dict[str, str]
) -> None:
    lt = fx.lamp_type(db)
    db.commit()
    body = _get(
        client,
        "/api/v1/forecasts/curve",
        reader,
        lamp_type_id=lt.id,
        voltage_v=220.0,
        t_max_h=3000,
        points=31,
    )
    eta = 1000.0 / math.log(2.0) ** (1 / 3.5) * (220.0 / 230.0) ** -13  # inverse power law
    t = np.array(body["t_h"])
    assert body["scale_h"] == pytest.approx(eta)
    assert body["survival"] == pytest.approx(weibull.sf(t, 3.5, eta).tolist(), rel=1e-12)
    m = weibull_renewal(3.5, eta, 3000.0, 2000).at(t)
    assert body["renewal_m"] == pytest.approx(m.tolist(), rel=1e-6, abs=1e-9)
    assert body["light_factor"] == pytest.approx((220 / 230) ** 3.4)
    r = client.get("/api/v1/forecasts/curve", params={"lamp_type_id": 999_999}, headers=reader)
    assert r.status_code == 404


def test_field_fit_and_forecasts_use_its_choice(
    db: Session, client: TestClient, reader: dict[str, str]
) -> None:
    s = fx.site(db)
    a = fx.area(db, s)
    lt = fx.lamp_type(db)
    fx.fixtures(db, a, lt, 30)
    db.commit()
    positions = db.query(LampPosition).order_by(LampPosition.id).all()
    rng = np.random.default_rng(7)
    hours = np.sort(weibull.percentile(rng.uniform(0.05, 0.95, 24), 3.0, 900.0))
    at = T0 + timedelta(days=100)  # 1,200 h by schedule for lamps still burning
    for p, h in zip(positions[:24], hours, strict=True):
        burnouts.report_burnout(
            db, position_id=p.id, reported_at=at, burn_hours=float(h), replaced=True
        )
    db.commit()
    body = _get(client, f"/api/v1/field-fits/lamp-types/{lt.id}", reader)
    assert body["n_failures"] == 24 and body["n_removed"] == 24
    # Lamps in service are censored at their age now; the API reads "now" a moment later,
    # so the comparison allows for a few milliseconds of schedule hours.
    ages = position_ages(db, lamp_type_id=lt.id)
    times = np.concatenate((hours, ages.age_h[ages.age_h > 0]))
    failed = np.concatenate((np.ones(24, bool), np.zeros(times.size - 24, bool)))
    ref = fit_weibull(times, failed)
    assert body["mle"]["shape"] == pytest.approx(ref.shape, rel=1e-6)
    assert body["mle"]["scale_h"] == pytest.approx(ref.scale, rel=1e-6)
    km = kaplan_meier(times, failed)
    assert [p["survival"] for p in body["kaplan_meier"]] == pytest.approx(km.survival.tolist())
    assert [p["at_risk"] for p in body["kaplan_meier"]] == km.at_risk.tolist()
    # 24 failures on a catalogue beta of 3.5: Z = 24/(24 + 16.5/3.5^2) = 0.95 (credibility)
    assert body["choice"]["method"] == "field" and body["forecasts_use"]["method"] == "field"
    assert body["forecasts_use"]["weight"] == pytest.approx(
        24 / (24 + 1 / (3.5 * 0.2465) ** 2), rel=1e-3
    )
    fc = _get(client, f"/api/v1/forecasts/lamp-types/{lt.id}", reader)
    assert fc["curves"][0]["method"] == "field"
    assert fc["curves"][0]["shape"] == pytest.approx(ref.shape, rel=1e-6)
