"""Plans with luminaire dirt and cleaning: the floor on maintained light, cleaning costs,
the cleaning-only option and the interval across the life curve's bounds."""

from __future__ import annotations

import math
from datetime import UTC, datetime, timedelta

import numpy as np
import pytest
from fastapi.testclient import TestClient
from scipy.interpolate import PchipInterpolator
from sqlalchemy import null
from sqlalchemy.orm import Session

from service.reliability.conditions import switching_life_factor, voltage_effect
from service.reliability.replacement import plan_block_replacement
from service.reliability.weibull import Weibull
from tests.factories import plan_area, plan_fixtures, plan_lamp_type, plan_site

AT = datetime(2026, 6, 1, 20, 0, tzinfo=UTC)
# The default linear fluorescent lumen curve's knots (service/reliability/lumen.py, [memory]).
KNOTS_H = [0.0, 1200.0, 9600.0, 16800.0, 24000.0]
KNOTS_F = [1.0, 0.97, 0.93, 0.9, 0.87]
WEEKLY_H = 60.0  # the builders' area
YEAR_H = WEEKLY_H * 365.25 / 7.0  # burn hours per calendar year
YEARS = [0.5, 1.0, 1.5, 2.0, 2.5, 3.0]
# CIE 97:2005 LMF table, type E (dustproof IP5X), clean room (recalled from memory).
CIE_97_E_CLEAN = [0.96, 0.94, 0.92, 0.90, 0.88, 0.86]


def _area(db: Session, **over: object) -> int:
    s = plan_site(db)
    lt = plan_lamp_type(db, ballast_behaviour="reactor")
    a = plan_area(db, s, **over)
    plan_fixtures(db, a, lt, 10, lamps=2, installed_at=AT - timedelta(weeks=10), volts=230.0)
    db.commit()
    return a.id


def _plan(client: TestClient, reader: dict[str, str], area_id: int, **body: object) -> dict:
    r = client.post(
        f"/api/v1/areas/{area_id}/relamp-plan", json={"at": AT.isoformat(), **body}, headers=reader
    )
    assert r.status_code == 200, r.text
    return r.json()["lamp_types"][0]


def _lld(h: float) -> float:
    return float(PchipInterpolator(KNOTS_H, KNOTS_F)(h))


def test_dirt_makes_the_light_floor_bind_at_the_cie_97_crossing(
    client: TestClient, db: Session, reader: dict[str, str]
) -> None:
    # Dustproof luminaires (CIE 97 type E) in a clean room, cleaned only at group relamps.
    area_id = _area(
        db,
        light_floor=0.81,
        luminaire_type="dustproof",
        dirt_environment="clean",
        cleaning_interval_months=null(),  # the ORM needs NULL spelt out
        cleaning_minutes_per_fixture=0.0,
        relamp_includes_cleaning=True,
    )
    lt = _plan(client, reader, area_id)
    assert lt["binding"] == "light_floor"
    h = lt["inputs"]["light_floor_h"]
    assert h / YEAR_H < 3.0  # inside the table
    lmf = float(np.interp(h / YEAR_H, [0.0, *YEARS], [1.0, *CIE_97_E_CLEAN]))
    assert _lld(h) * lmf == pytest.approx(0.81, abs=2e-4)  # 230 V: voltage light factor 1
    # The lamp alone stays above 0.87 until 24,000 h: without the dirt no floor would bind.
    assert h < 24_000 and lt["interval_h"] == pytest.approx(h, rel=1e-6)
    ml = lt["maintained_light"]
    assert ml["light_at_interval"] == pytest.approx(0.81, abs=2e-4)
    assert "CIE 97:2005" in ml["source"]
    clean = ml["cleaning_only"]
    # Cleaning at mid-interval gives back the dirt: LLD x (1 - LMF) at half the interval.
    half = lt["interval_h"] / 2
    lmf_half = float(np.interp(half / YEAR_H, [0.0, *YEARS], [1.0, *CIE_97_E_CLEAN]))
    assert clean["light_gain"] == pytest.approx(_lld(half) * (1 - lmf_half), rel=1e-6)
    assert clean["cost_per_visit"] == 0.0  # no cleaning minutes, no hire


def test_cleaning_labour_is_part_of_the_group_visit_only_when_it_cleans(
    client: TestClient, db: Session, reader: dict[str, str]
) -> None:
    with_clean = _plan(
        client,
        reader,
        _area(db, cleaning_minutes_per_fixture=12.0, relamp_includes_cleaning=True),
    )
    without = _plan(
        client,
        reader,
        _area(db, cleaning_minutes_per_fixture=12.0, relamp_includes_cleaning=False),
    )
    cleaning = 12.0 / 60.0 * 40.0 * 10 / 20  # 10 fixtures over 20 positions
    assert with_clean["inputs"]["c_group"] - without["inputs"]["c_group"] == pytest.approx(cleaning)
    assert with_clean["maintained_light"]["cleaning_labour_per_position"] == pytest.approx(cleaning)
    assert without["maintained_light"]["relamp_includes_cleaning"] is False


def test_interval_at_the_scale_bounds_is_the_core_plan_at_that_scale(
    client: TestClient, db: Session, reader: dict[str, str]
) -> None:
    area_id = _area(db, cleaning_minutes_per_fixture=0.0, light_floor=None)
    lt = _plan(client, reader, area_id)
    fb = lt["fit_bounds"]
    lo, hi = fb["scale_bounds_h"]
    # No field records: the credibility prior, the catalogue scale x exp(-+ 1.645 sigma),
    # sigma = ln 1.5 / 1.645, i.e. exactly the catalogue scale / 1.5 and x 1.5.
    base = Weibull.from_rated_life(24_000.0, 5.0, 50.0)
    assert (lo, hi) == pytest.approx((base.scale / 1.5, base.scale * 1.5))
    hps = 60.0 / 7.0
    fv = voltage_effect(230.0, 230.0, "linear_fluorescent", "reactor").life_factor
    fs = float(switching_life_factor(hps, 3.0)[0])
    c_group, c_spot = lt["inputs"]["c_group"], lt["inputs"]["c_spot"]
    for scale, got in ((lo, fb["interval_h_at_lower"]), (hi, fb["interval_h_at_upper"])):
        core = plan_block_replacement(Weibull(5.0, scale * fv * fs), c_group, c_spot)
        assert core.interval_h is not None and got == pytest.approx(core.interval_h, rel=1e-6)
    # The optimum scales with the life (same shape, same costs): the ratio is 1.5^2.
    assert fb["interval_h_at_upper"] / fb["interval_h_at_lower"] == pytest.approx(2.25, rel=1e-3)
    assert fb["yearly_saving_at_lower"] > lt["yearly_saving"] > fb["yearly_saving_at_upper"]
    assert math.isclose(fb["confidence"], 0.9)
