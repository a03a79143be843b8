"""A discharge lamp's voltage response follows its fixture's ballast kind, not its type's."""

from __future__ import annotations

from datetime import timedelta
from typing import Any

import pytest
from fastapi.testclient import TestClient
from sqlalchemy import select
from sqlalchemy.orm import Session

from service.events.removals import record_removals
from service.register.models import LampPosition
from service.reliability.conditions import voltage_effect
from tests import factories as fx

T0 = fx.T0
AT = T0 + timedelta(days=200)
VOLTS = 241.5  # 5 % over the 230 V rating


def _pair(db: Session, technology: str = "metal_halide") -> tuple[Any, dict[str, int]]:
    """Two identical fixtures at 241.5 V, one on a reactor and one on a regulating ballast."""
    s = fx.site(db)
    # No starts in the schedule: hours per start unknown, so the rated cycle (factor 1).
    a = fx.area(db, s, starts_per_day=0.0)
    lt = fx.lamp_type(
        db,
        code=f"LT-{technology}",
        technology=technology,
        rated_life_h=12_000.0,
        weibull_shape=3.0,
        life_exponent=None,
        ballast_behaviour="reactor" if technology != "halogen" else None,
    )
    fixtures = {}
    for kind in ("reactor", "regulating"):
        (f,) = fx.fixtures(db, a, lt, tag=kind, ballast_kind=kind, measured_voltage_v=VOLTS)
        fixtures[kind] = f.id
    db.commit()
    return a, fixtures


def _core_life(technology: str, ballast: str) -> float:
    # Source: the numeric core, reliability.conditions.voltage_effect for that ballast.
    return voltage_effect(VOLTS, 230.0, technology, ballast).life_factor


def test_forecast_life_factor_follows_the_fixture_ballast(
    db: Session, client: TestClient, reader: dict[str, str]
) -> None:
    a, fixtures = _pair(db)
    r = client.get(
        f"/api/v1/forecasts/areas/{a.id}",
        params={"at": AT.isoformat(), "positions": "true", "horizon_weeks": 4},
        headers=reader,
    )
    assert r.status_code == 200, r.text
    by_fixture = {p["fixture_id"]: p for p in r.json()["positions"]}
    got = {kind: by_fixture[fid]["life_factor"] for kind, fid in fixtures.items()}
    for kind in fixtures:
        assert got[kind] == pytest.approx(_core_life("metal_halide", kind), rel=1e-12)
    # Reactor gain 2 gives 10 % more lamp watts, regulating 0.5 only 2.5 %: not the same life.
    assert got["reactor"] < got["regulating"] < 1.0
    assert got["reactor"] / got["regulating"] == pytest.approx(
        _core_life("metal_halide", "reactor") / _core_life("metal_halide", "regulating"),
        rel=1e-12,
    )


def test_filament_lamp_ignores_a_stray_fixture_ballast(
    db: Session, client: TestClient, reader: dict[str, str]
) -> None:
    a, _ = _pair(db, technology="halogen")  # written past the register's checks
    r = client.get(
        f"/api/v1/forecasts/areas/{a.id}",
        params={"at": AT.isoformat(), "positions": "true"},
        headers=reader,
    )
    assert r.status_code == 200, r.text
    want = _core_life("halogen", "none")  # filament power laws, whatever the fixture says
    positions = r.json()["positions"]
    assert len(positions) == 2
    for p in positions:
        assert p["life_factor"] == pytest.approx(want, rel=1e-12)


def test_removal_normalised_hours_use_the_fixture_ballast(db: Session) -> None:
    _, fixtures = _pair(db)
    positions = db.scalars(select(LampPosition).order_by(LampPosition.id)).all()
    removals = record_removals(db, positions, removed_at=AT, failed=False, reason="group_relamp")
    kind_of = {fid: kind for kind, fid in fixtures.items()}
    assert len(removals) == 2
    for rem in removals:
        assert rem.burn_hours == pytest.approx(200 * 12.0)  # 200 days x 12 h
        # Rated-voltage-equivalent hours: burn hours x acceleration 1 / life factor.
        want = rem.burn_hours / _core_life("metal_halide", kind_of[rem.fixture_id])
        assert rem.normalised_hours == pytest.approx(want, rel=1e-12)
    assert len({round(r.normalised_hours, 6) for r in removals}) == 2
