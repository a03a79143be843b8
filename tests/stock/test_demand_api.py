"""Demand, to-order and outlook endpoints against an independent Monte Carlo of the fleet."""

from __future__ import annotations

from datetime import timedelta
from typing import Any

import numpy as np
from fastapi.testclient import TestClient
from sqlalchemy.orm import Session

from service.db.base import utcnow
from service.forecasting.fit import load_fitted_types
from service.forecasting.ranges import position_sd_ln_scale
from service.readings.ages import position_ages
from service.reliability.fleet import evaluate_fleet
from service.stock.models import Storeroom, StoreroomSite
from tests.factories import plan_area, plan_fixtures, plan_lamp_type, plan_site

API = "/api/v1"
WEEKS = 26
SIMS = 6000


def _fleet(db: Session) -> dict[str, Any]:
    """An area of 120 incandescent positions of spread ages."""
    s = plan_site(db, nominal_voltage_v=120.0)
    lt = plan_lamp_type(
        db,
        technology="incandescent",
        rated_volts=120.0,
        rated_life_h=2000.0,
        weibull_shape=3.0,
        contains_mercury=False,
        unit_price=1.5,
    )
    a = plan_area(db, s, weekly_burn_hours=70.0)
    rng = np.random.default_rng(11)
    for h in rng.uniform(0, 1800, 60):
        plan_fixtures(
            db,
            a,
            lt,
            1,
            lamps=2,
            installed_at=utcnow() - timedelta(weeks=1),
            hours_at_install=float(h),
        )
    room = Storeroom(name=f"MC store {s.id}")
    db.add(room)
    db.flush()
    db.add(StoreroomSite(site_id=s.id, storeroom_id=room.id))
    db.commit()
    return {"site": s.id, "area": a.id, "lt": lt.id, "room": room.id}


def _monte_carlo(db: Session, site_id: int, group_week: int | None) -> np.ndarray:
    """Simulated spot replacements per week (SIMS x WEEKS), from the lamps' Weibull lives.

    Independent of the renewal and mixture arithmetic: each replicate first draws the lamp
    type's scale from its lognormal, eta = eta_hat e^{sigma Z} (sigma: the forecast's own
    spread of ln eta for the type, forecasting.ranges), shared by every position of the
    replicate; each position's current lamp survives to its age a, so its remaining life is
    eta ((a/eta)^beta - ln U)^(1/beta) - a; every new lamp lives Weibull(beta, eta). A group
    relamp at the start of group_week puts new lamps in everywhere. Failures are binned into
    weeks of the area's burn hours.
    """
    ages = position_ages(db, site_id=site_id, at=utcnow(), active_only=True)
    types = load_fitted_types(
        db, ages.lamp_type_id, field_fit=True, ballast_kinds=ages.ballast_kind
    )
    k = types.index(ages.lamp_type_id, ages.ballast_kind)
    res = evaluate_fleet(types.table, k, ages.age_h, ages.voltage_v, ages.hours_per_start, 1.0)
    sigma = position_sd_ln_scale(types, ages.lamp_type_id)  # one type: one spread
    beta = types.table.shape[k]
    rate = ages.burn_h_per_week
    rng = np.random.default_rng(5)
    n = ages.size
    # The model's per-position Weibull scale (voltage and cycle applied), per replicate.
    eta = res.scale_h[None, :] * np.exp(sigma[None, :] * rng.standard_normal((SIMS, 1)))
    horizon = rate * WEEKS  # burn hours
    cut = rate * (WEEKS if group_week is None else group_week)  # the group relamp, hours
    counts = np.zeros((SIMS, WEEKS))

    def run(t: np.ndarray, end: np.ndarray) -> None:
        alive = t < end
        while alive.any():
            week = np.floor(t / rate).astype(int)
            sims, pos = np.nonzero(alive)
            np.add.at(counts, (sims, week[sims, pos]), 1.0)
            t = t + eta * (-np.log(rng.random((SIMS, n)))) ** (1 / beta)
            alive = t < end

    a = np.broadcast_to(ages.age_h, (SIMS, n))
    u = rng.random((SIMS, n))
    run(eta * ((a / eta) ** beta - np.log(u)) ** (1 / beta) - a, cut)  # lamps in place now
    if group_week is not None:  # new lamps from the group relamp on
        run(cut + eta * (-np.log(rng.random((SIMS, n)))) ** (1 / beta), horizon)
    return counts


def test_weekly_demand_mean_and_quantile_against_monte_carlo(
    client: TestClient, db: Session, reader: dict[str, str]
) -> None:
    k = _fleet(db)
    r = client.get(f"{API}/storerooms/{k['room']}/demand?weeks={WEEKS}", headers=reader)
    assert r.status_code == 200, r.text
    body = r.json()
    (line,) = body["lines"]
    assert line["positions"] == 120 and line["method"] == "mixture (exact)"
    weeks = line["weeks"]
    groups = [i for i, w in enumerate(weeks) if w["group"]]
    assert len(groups) <= 1 and all(weeks[i]["group"] == 120 for i in groups)
    mc = _monte_carlo(db, k["site"], groups[0] if groups else None)
    mean = np.array([w["spot_mean"] for w in weeks])
    q = np.array([w["spot_quantile"] for w in weeks])
    mc_mean = mc.mean(axis=0)
    mc_q = np.quantile(mc, 0.95, axis=0, method="inverted_cdf")
    # Issue 13 acceptance: mean within 2 %, quantile within one lamp or 3 % (Monte Carlo).
    # The nominal-scale model (no mixture) misses this mean by 13 % (44.7 vs 51.4 lamps).
    assert abs(mean.sum() - mc_mean.sum()) <= 0.02 * mc_mean.sum()
    assert np.all(np.abs(mean - mc_mean) <= np.maximum(0.02 * mc_mean, 0.1))
    assert np.all(np.abs(q - mc_q) <= np.maximum(1, 0.03 * mc_q))
    # Breakage: 2 % of the lamps handled, spot and group (common practice).
    group = np.array([w["group"] for w in weeks])
    assert np.allclose([w["breakage"] for w in weeks], 0.02 * (mean + group), atol=1e-3)


def test_to_order_and_outlook(client: TestClient, db: Session, writer: dict[str, str]) -> None:
    k = _fleet(db)
    settings = {
        "lead_time_weeks": 3,
        "pack_size": 10,
        "order_cost": 20,
        "holding_rate_per_year": 0.3,
    }
    r = client.put(f"{API}/storerooms/{k['room']}/stock/{k['lt']}", json=settings, headers=writer)
    assert r.status_code == 201, r.text
    body = {"lamp_type_id": k["lt"], "kind": "received", "quantity": 5}
    client.post(f"{API}/storerooms/{k['room']}/movements", json=body, headers=writer)
    r = client.get(f"{API}/storerooms/{k['room']}/to-order", headers=writer)
    assert r.status_code == 200, r.text
    (line,) = r.json()
    demand = client.get(f"{API}/storerooms/{k['room']}/demand", headers=writer).json()
    weeks = demand["lines"][0]["weeks"]
    lead_mean = sum(w["total_mean"] for w in weeks[:3])
    assert abs(line["lead_time_demand_mean"] - lead_mean) <= 0.05 * lead_mean + 0.01
    assert line["reorder_point"] >= round(lead_mean)  # a quantile above the mean at 95 %
    assert line["available"] == 5 and line["order_quantity"] > 0
    assert line["order_quantity"] % 10 == 0
    # EOQ from the line's own annual demand: sqrt(2 D S / H), H = 0.3 x 1.5 a lamp a year.
    assert abs(line["eoq"] - (2 * line["annual_demand"] * 20 / (0.3 * 1.5)) ** 0.5) < 0.01
    csv = client.get(f"{API}/storerooms/{k['room']}/to-order/download?format=csv", headers=writer)
    assert csv.status_code == 200 and csv.text.splitlines()[0].startswith("storeroom_id,")
    assert len(csv.text.splitlines()) == 2
    js = client.get(f"{API}/storerooms/{k['room']}/to-order/download?format=json", headers=writer)
    assert js.json()[0]["order_quantity"] == line["order_quantity"]
    r = client.get(f"{API}/storerooms/{k['room']}/stock/{k['lt']}/outlook", headers=writer)
    assert r.status_code == 200, r.text
    ol = r.json()
    assert ol["weeks"][3]["received"] == line["order_quantity"]  # arrives after 3 weeks
    level = 5.0
    for w, d in zip(ol["weeks"], weeks, strict=True):
        level += w["received"] - d["total_mean"]
        assert abs(w["level_mean"] - level) < 0.01
