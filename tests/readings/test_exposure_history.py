"""Wear accumulated over voltage readings: ages' history, removal normalisation, forecasts."""

from __future__ import annotations

from datetime import timedelta

import pytest
from fastapi.testclient import TestClient
from scipy import stats
from sqlalchemy.orm import Session

from service.readings.ages import position_ages
from service.reliability.weibull import scale_from_rated_life
from tests import factories as fx

T0 = fx.T0


def _two_supplies(db: Session, client: TestClient, writer: dict[str, str]) -> tuple[int, int]:
    """One incandescent fixture (230 V, life x V^-13): 0.95 x rated for 10 days, then 1.05 x."""
    s = fx.site(db)
    a = fx.area(db, s)  # 12 h a day
    lt = fx.lamp_type(db)
    (f,) = fx.fixtures(db, a, lt, 1, lamps=1)
    db.commit()
    for day, v in ((0, 0.95 * 230.0), (10, 1.05 * 230.0)):
        r = client.post(
            "/api/v1/voltage-readings",
            json={
                "fixture_id": f.id,
                "measured_at": (T0 + timedelta(days=day)).isoformat(),
                "volts": v,
            },
            headers=writer,
        )
        assert r.status_code == 201, r.text
    return f.id, f.positions[0].id


def test_removal_normalised_by_accumulated_exposure(
    db: Session, client: TestClient, writer: dict[str, str]
) -> None:
    # Worked cumulative-exposure case (Nelson, *Accelerated Testing*): 120 h at 0.95 and 120 h
    # at 1.05 x rated, life x r^-13: 120 x 0.95^13 + 120 x 1.05^13 = 287.9 rated hours; the
    # mean voltage (1.00 x rated) would have said 240.
    fid, pid = _two_supplies(db, client, writer)
    at = T0 + timedelta(days=20)
    ages = position_ages(db, fixture_id=fid, at=at)
    assert ages.voltage_source.tolist() == ["readings_weighted"]
    assert ages.voltage_v[0] == pytest.approx(230.0)
    assert ages.history.hours.sum() == pytest.approx(240.0)
    r = client.post(
        "/api/v1/lamp-removals",
        json={
            "position_id": pid,
            "removed_at": at.isoformat(),
            "failed": True,
            "reason": "burnout",
        },
        headers=writer,
    )
    assert r.status_code == 201, r.text
    want = 120.0 * 0.95**13 + 120.0 * 1.05**13
    assert r.json()["normalised_hours"] == pytest.approx(want, rel=1e-9)
    assert r.json()["burn_hours"] == pytest.approx(240.0)


def test_forecast_survival_from_exposure(
    db: Session, client: TestClient, writer: dict[str, str]
) -> None:
    # scipy.stats.weibull_min (beta 3.5, B50 1,000 h) at the accumulated rated age.
    fid, _ = _two_supplies(db, client, writer)
    at = T0 + timedelta(days=20)
    r = client.get(
        f"/api/v1/forecasts/fixtures/{fid}",
        params={"at": at.isoformat(), "horizon_weeks": 1},
        headers=writer,
    )
    assert r.status_code == 200, r.text
    a_r = 120.0 * 0.95**13 + 120.0 * 1.05**13
    eta = float(scale_from_rated_life(1_000.0, 3.5, 50.0))
    want = stats.weibull_min(3.5, scale=eta).sf(a_r)
    assert r.json()["summary"]["survival_now"] == pytest.approx(want, rel=1e-6)
