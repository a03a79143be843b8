"""A relamp plan uses the ballast most of a lamp type's fixtures in the area run on."""

from __future__ import annotations

from datetime import UTC, datetime, timedelta

import pytest
from fastapi.testclient import TestClient
from sqlalchemy.orm import Session

from service.reliability.conditions import voltage_effect
from tests.factories import plan_area, plan_fixtures, plan_lamp_type, plan_site

AT = datetime(2026, 6, 1, 20, 0, tzinfo=UTC)
VOLTS = 241.5  # 5 % over the 230 V rating


@pytest.mark.parametrize(("most", "few"), [("regulating", "reactor"), ("reactor", "regulating")])
def test_plan_inputs_name_the_dominant_ballast(
    db: Session, client: TestClient, reader: dict[str, str], most: str, few: str
) -> None:
    s = plan_site(db)
    lt = plan_lamp_type(db, technology="metal_halide", ballast_behaviour="electronic")
    a = plan_area(db, s)
    when = AT - timedelta(weeks=10)
    plan_fixtures(db, a, lt, 3, installed_at=when, volts=VOLTS, ballast_kind=most)
    plan_fixtures(db, a, lt, 1, installed_at=when, volts=VOLTS, ballast_kind=few)
    db.commit()
    r = client.post(
        f"/api/v1/areas/{a.id}/relamp-plan", json={"at": AT.isoformat()}, headers=reader
    )
    assert r.status_code == 200, r.text
    (plan,) = r.json()["lamp_types"]
    inputs = plan["inputs"]
    assert inputs["ballast_kind"] == most
    assert inputs["voltage_v"] == VOLTS
    # Source: the numeric core, reliability.conditions.voltage_effect on that ballast.
    want = voltage_effect(VOLTS, 230.0, "metal_halide", most).life_factor
    assert inputs["voltage_life_factor"] == pytest.approx(want, rel=1e-12)
