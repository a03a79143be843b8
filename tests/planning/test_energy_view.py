"""The plan's energy view and the cost-per-megalumen-hour objective, against the numeric core."""

from __future__ import annotations

import math
from datetime import UTC, datetime, timedelta
from typing import Any

import numpy as np
import pytest
from fastapi.testclient import TestClient
from scipy import integrate
from sqlalchemy import func, select
from sqlalchemy.orm import Session

from service.catalogue.models import LampType
from service.reliability.conditions import switching_life_factor, voltage_effect
from service.reliability.dirt import luminaire_maintenance_factor
from service.reliability.lumen import DEFAULT_EFFICACY_LM_PER_W, default_lumen_curve
from service.reliability.megalumen import cost_per_megalumen_hour
from service.reliability.renewal import weibull_renewal
from service.reliability.replacement import block_cost_rate, plan_block_replacement
from service.reliability.weibull import Weibull
from service.workorders.models import WorkOrder
from tests.factories import plan_area, plan_fixtures, plan_lamp_type, plan_site

AT = datetime(2026, 6, 1, 20, 0, tzinfo=UTC)
MLM = "cost_per_megalumen_hour"
HPS = 60.0 / 7.0  # plan_area: 60 burn hours a week, one start a day
# Same costs as tests/planning/test_relamp_plan.py: lamp + labour (+ hire share 0) + disposal.
C_GROUP = 4.0 + 4.0 / 60.0 * 40.0 + 0.5
C_SPOT = 4.0 + 30.0 / 60.0 * 40.0 + 0.5
NEAR_CLEAN: dict[str, Any] = {
    "luminaire_type": "dustproof",
    "dirt_environment": "very_clean",
    "cleaning_interval_months": 0.5,
    "cleaning_minutes_per_fixture": 0.0,
    "relamp_includes_cleaning": True,  # the dirt cycle restarts at each group relamp too
}


def _area(
    db: Session, volts: float = 240.0, dirt: dict[str, Any] | None = None, **lt_over: Any
) -> int:
    s = plan_site(db)
    lt = plan_lamp_type(db, ballast_behaviour="reactor", **lt_over)
    # Near-clean luminaires and no cleaning labour, so the lamp alone sets these figures:
    # dustproof in a very clean room, cleaned every half month (CIE 97:2005 LMF >= 0.998,
    # recalled from memory); the dirt itself is tested in tests/planning/test_maintained_light.py.
    a = plan_area(db, s, **(NEAR_CLEAN if dirt is None else dirt))
    plan_fixtures(db, a, lt, 10, lamps=2, installed_at=AT - timedelta(weeks=10), volts=volts)
    db.commit()
    return a.id


def _plan(client: TestClient, reader: dict[str, str], area_id: int, **body: Any) -> Any:
    r = client.post(
        f"/api/v1/areas/{area_id}/relamp-plan",
        json={"at": AT.isoformat(), **body},
        headers=reader,
    )
    assert r.status_code == 200, r.text
    (lt,) = r.json()["lamp_types"]
    return lt


def _core(initial_lumens: float) -> tuple[Weibull, Any, float, float]:
    """Life, voltage effect, lamp watts and initial lumens at 240 V, straight from the core."""
    fv = voltage_effect(240.0, 230.0, "linear_fluorescent", "reactor")
    fs = float(switching_life_factor(HPS, 3.0)[0])
    base = Weibull.from_rated_life(24_000.0, 5.0, 50.0)
    life = Weibull(5.0, base.scale * fv.life_factor * fs)
    return life, fv, 32.0 * fv.power_factor, initial_lumens * fv.light_factor


def _dirt(environment: str, interval_months: float) -> tuple[Any, float]:
    """The area's dirt as the megalumen core takes it, worked out here from the LMF table.

    Dustproof luminaires (CIE 97:2005 type E, table values recalled from memory) cleaned
    every interval_months and at each group relamp: the time since cleaning is t mod I
    (calendar years from 60 burn hours a week); under spot replacement only, the time
    average of the LMF over one cleaning interval (scipy.integrate.quad).
    """
    years_i = interval_months / 12.0
    per_year = 60.0 * 365.25 / 7.0

    def lmf(t_h: Any) -> Any:
        years = np.asarray(t_h, dtype=float) / per_year
        return luminaire_maintenance_factor("dustproof", environment, np.mod(years, years_i))

    mean, _ = integrate.quad(
        lambda y: float(luminaire_maintenance_factor("dustproof", environment, y)), 0.0, years_i
    )
    return lmf, mean / years_i


def test_energy_view_equals_the_core_for_the_same_inputs(
    client: TestClient, db: Session, reader: dict[str, str]
) -> None:
    lt = _plan(client, reader, _area(db, initial_lumens=2_800.0))
    ev = lt["energy_view"]
    life, _, watts, lumens = _core(2_800.0)
    lmf, lmf_spot = _dirt("very_clean", 0.5)
    # Reactor ballast: lamp watts x (1 + 2 (V/V_rated - 1)) (conditions module, [practice]).
    assert ev["lamp_watts"] == pytest.approx(32.0 * (1 + 2 * (240 / 230 - 1)), rel=1e-12)
    assert ev["lamp_watts"] == pytest.approx(watts, rel=1e-12)
    assert ev["initial_lumens"] == pytest.approx(lumens, rel=1e-12)
    assert ev["initial_lumens_basis"] == "catalogue" and ev["objective"] == "cost"
    per_year = 60.0 * 365.25 / 7.0
    assert ev["energy_cost_per_position_per_year"] == pytest.approx(
        0.2 * watts / 1000.0 * per_year, rel=1e-12
    )
    assert lt["inputs"]["energy_cost_per_burn_hour"] == pytest.approx(0.2 * watts / 1000.0)
    # The core's own renewal grid (3 mean lives, 2,000 steps) and the default lumen curve.
    curve = weibull_renewal(5.0, life.scale, 3.0 * life.mean())
    lumen = default_lumen_curve("linear_fluorescent", 24_000.0)
    cost_t = plan_block_replacement(life, C_GROUP, C_SPOT).interval_h
    assert cost_t is not None and lt["interval_h"] == pytest.approx(cost_t, rel=1e-9)
    core = cost_per_megalumen_hour(
        [cost_t],
        curve,
        C_GROUP,
        C_SPOT,
        lamp_watts=watts,
        tariff_per_kwh=0.2,
        initial_lumens=lumens,
        lumen_fraction=lumen.at,
        survival=life.sf,
        # The energy view counts luminaire dirt (maintained light, as plans and forecasts do):
        # near-clean here, so this moves the figures by about 0.1 % only.
        luminaire_factor=lmf,
        spot_luminaire_factor=lmf_spot,
    )
    assert ev["interval_h"] == ev["cost_optimum_interval_h"] == lt["interval_h"]
    # The plan solves the renewal curve on a unit scale and rescales it (equal to rounding).
    assert ev["mean_light_fraction"] == pytest.approx(core.mean_light_fraction[0], rel=1e-7)
    assert ev["cost_per_megalumen_hour"] == pytest.approx(core.cost_per_mlmh[0], rel=1e-7)
    assert ev["cost_per_megalumen_hour_at_cost_optimum"] == ev["cost_per_megalumen_hour"]
    assert ev["spot_only_cost_per_megalumen_hour"] == pytest.approx(
        core.spot_only_cost_per_mlmh, rel=1e-7
    )
    assert ev["spot_only_mean_light_fraction"] == pytest.approx(
        core.spot_only_mean_light_fraction, rel=1e-7
    )
    assert core.best_interval_h is not None
    assert ev["best_interval_h"] == pytest.approx(core.best_interval_h, rel=1e-4)
    assert ev["best_cost_per_megalumen_hour"] == pytest.approx(core.best_cost_per_mlmh, rel=1e-7)
    assert ev["best_binding"] == "megalumen_optimum"
    # Here energy and light loss favour a shorter interval than cost alone, and it says so.
    assert ev["best_interval_h"] < 0.95 * cost_t and ev["note"]
    assert ev["best_cost_per_megalumen_hour"] <= ev["cost_per_megalumen_hour"]


def test_objective_switch_changes_the_interval_only_when_asked(
    client: TestClient, db: Session, reader: dict[str, str]
) -> None:
    area_id = _area(db, initial_lumens=2_800.0)
    url = f"/api/v1/areas/{area_id}/relamp-plan"
    before = client.get(url, headers=reader).json()
    lamp_types_before = db.scalar(select(func.count()).select_from(LampType))
    default = _plan(client, reader, area_id)
    explicit = _plan(client, reader, area_id, objective="cost")
    assert default["interval_h"] == explicit["interval_h"]
    assert default["objective"] == explicit["objective"] == "cost"
    assert default["binding"] == "cost_optimum"

    mlm = _plan(client, reader, area_id, objective=MLM)
    ev = mlm["energy_view"]
    assert mlm["objective"] == ev["objective"] == MLM
    assert mlm["binding"] == "megalumen_optimum"
    assert mlm["interval_h"] == pytest.approx(ev["best_interval_h"], rel=1e-12)
    assert mlm["interval_h"] == pytest.approx(default["energy_view"]["best_interval_h"], rel=1e-9)
    assert mlm["interval_h"] < default["interval_h"]
    assert ev["cost_optimum_interval_h"] == pytest.approx(default["interval_h"], rel=1e-12)
    # Cost figures are those of the chosen interval (Barlow & Proschan C(T), core function).
    life, _, _, _ = _core(2_800.0)
    curve = weibull_renewal(5.0, life.scale, 3.0 * life.mean())
    rate = float(block_cost_rate(mlm["interval_h"], curve, C_GROUP, C_SPOT))
    assert mlm["cost_rate"] == pytest.approx(rate, rel=1e-7)
    assert mlm["cost_rate"] >= default["cost_rate"]  # the cost optimum is cheapest per hour
    assert mlm["expected_spot_per_position"] == pytest.approx(
        float(curve.at(mlm["interval_h"])), rel=1e-6
    )
    assert any("megalumen" in n for n in mlm["notes"])

    # Nothing stored: the plan reads back as before, no orders, no new lamp types.
    after = client.get(url, headers=reader).json()
    assert after["lamp_types"][0]["interval_h"] == before["lamp_types"][0]["interval_h"]
    assert after["lamp_types"][0]["objective"] == "cost"
    assert after["due_on"] == before["due_on"]
    assert db.scalar(select(func.count()).select_from(WorkOrder)) == 0
    assert db.scalar(select(func.count()).select_from(LampType)) == lamp_types_before

    r = client.post(url, json={"objective": "light"}, headers=reader)
    assert r.status_code == 422 and r.json()["errors"][0]["field"] == "objective"


def test_caps_still_hold_under_the_megalumen_objective(
    client: TestClient, db: Session, reader: dict[str, str]
) -> None:
    # The default fluorescent curve reaches 0.92 near half the rated life, below the
    # megalumen optimum (about 0.58 x rated life here): the light floor binds.
    # At rated volts (the floor is on maintained light, which includes the voltage light
    # factor: 240 V on a reactor ballast would give 8 % more light).
    area_id = _area(db, volts=230.0, initial_lumens=2_800.0)
    lt = _plan(client, reader, area_id, objective=MLM, light_floor=0.92)
    floor_h = lt["inputs"]["light_floor_h"]
    assert lt["binding"] == "light_floor" and lt["energy_view"]["best_binding"] == "light_floor"
    assert lt["interval_h"] == pytest.approx(floor_h, rel=1e-9)
    free = _plan(client, reader, area_id, objective=MLM)
    assert free["interval_h"] > floor_h


def test_without_catalogue_lumens_the_assumed_efficacy_is_used_and_labelled(
    client: TestClient, db: Session, reader: dict[str, str]
) -> None:
    assumed = _plan(client, reader, _area(db))["energy_view"]
    given = _plan(client, reader, _area(db, initial_lumens=2_800.0))["energy_view"]
    _, fv, _, _ = _core(1.0)
    eff = DEFAULT_EFFICACY_LM_PER_W["linear_fluorescent"]
    assert assumed["initial_lumens_basis"] == "assumed_efficacy"
    assert assumed["assumed_efficacy_lm_per_w"] == eff
    assert assumed["initial_lumens"] == pytest.approx(32.0 * eff * fv.light_factor, rel=1e-12)
    # Initial light scales every megalumen figure alike: the best interval is unchanged, the
    # money per Mlm.h scales inversely with the lumens.
    assert assumed["best_interval_h"] == pytest.approx(given["best_interval_h"], rel=1e-9)
    ratio = given["initial_lumens"] / assumed["initial_lumens"]
    assert assumed["cost_per_megalumen_hour"] == pytest.approx(
        given["cost_per_megalumen_hour"] * ratio, rel=1e-9
    )
    assert not math.isnan(assumed["mean_light_fraction"])
    assert assumed["mean_light_fraction"] == pytest.approx(given["mean_light_fraction"])


def test_dirt_lowers_the_delivered_light_as_the_core_counts_it(
    client: TestClient, db: Session, reader: dict[str, str]
) -> None:
    # A dustproof luminaire in a normal environment cleaned yearly (and at each relamp): the
    # energy view must count the dirt (maintained light), not the lamp's light alone.
    dirty = {**NEAR_CLEAN, "dirt_environment": "normal", "cleaning_interval_months": 12.0}
    lt = _plan(client, reader, _area(db, dirt=dirty, initial_lumens=2_800.0))
    clean = _plan(client, reader, _area(db, initial_lumens=2_800.0))
    ev, ev_clean = lt["energy_view"], clean["energy_view"]
    life, _, watts, lumens = _core(2_800.0)
    lmf, lmf_spot = _dirt("normal", 12.0)
    curve = weibull_renewal(5.0, life.scale, 3.0 * life.mean())
    core = cost_per_megalumen_hour(
        [lt["interval_h"]],
        curve,
        C_GROUP,
        C_SPOT,
        lamp_watts=watts,
        tariff_per_kwh=0.2,
        initial_lumens=lumens,
        lumen_fraction=default_lumen_curve("linear_fluorescent", 24_000.0).at,
        survival=life.sf,
        luminaire_factor=lmf,
        spot_luminaire_factor=lmf_spot,
    )
    assert ev["mean_light_fraction"] == pytest.approx(core.mean_light_fraction[0], rel=1e-7)
    assert ev["spot_only_mean_light_fraction"] == pytest.approx(
        core.spot_only_mean_light_fraction, rel=1e-7
    )
    # Spot only: the lamp's stationary light times the mean LMF of a cleaning interval.
    assert ev["spot_only_mean_light_fraction"] == pytest.approx(
        ev_clean["spot_only_mean_light_fraction"] / _dirt("very_clean", 0.5)[1] * lmf_spot,
        rel=1e-9,
    )
    assert lmf_spot < 0.97 and ev["cost_per_megalumen_hour"] > ev_clean["cost_per_megalumen_hour"]
