"""Retiring the fixtures and the lamp type behind a field fit leaves the fit as it was."""

from __future__ import annotations

import math
from datetime import timedelta
from typing import Any

import pytest
from fastapi.testclient import TestClient
from sqlalchemy.orm import Session

from service.events.models import LampRemoval
from tests import factories as fx

N_FAILED = 12


def _removals(db: Session, fixtures: list[Any], lamp_type_id: int) -> None:
    """Twelve failures at Weibull median-rank ages (Benard's approximation, beta 3.5, 1000 h)."""
    for i, f in enumerate(fixtures[:N_FAILED], start=1):
        rank = (i - 0.3) / (N_FAILED + 0.4)  # Benard's median rank
        hours = 1000.0 * (-math.log(1.0 - rank)) ** (1 / 3.5)
        pos = f.positions[0]
        db.add(
            LampRemoval(
                site_id=f.site_id,
                fixture_id=f.id,
                position_id=pos.id,
                lamp_type_id=lamp_type_id,
                installed_at=fx.T0,
                removed_at=fx.T0 + timedelta(hours=hours),
                burn_hours=hours,
                normalised_hours=hours,
                failed=True,
                reason="burnout",
                created_at=fx.T0 + timedelta(hours=hours),
            )
        )
    db.flush()


def _fit(client: TestClient, lamp_type_id: int, headers: dict[str, str]) -> dict[str, Any]:
    r = client.get(f"/api/v1/field-fits/lamp-types/{lamp_type_id}", headers=headers)
    assert r.status_code == 200, r.text
    return dict(r.json())


def test_retiring_keeps_the_field_fit(
    db: Session, client: TestClient, writer: dict[str, str]
) -> None:
    s = fx.site(db)
    a = fx.area(db, s)
    lt = fx.lamp_type(db)
    fixtures = fx.fixtures(db, a, lt, N_FAILED)
    _removals(db, fixtures, lt.id)
    db.commit()
    before = _fit(client, lt.id, writer)
    assert before["n_removed"] == N_FAILED and before["mle"] is not None, before
    for path in (f"/api/v1/fixtures/{fixtures[0].id}", f"/api/v1/sites/{s.id}"):
        assert client.post(f"{path}/retire", headers=writer).status_code == 200
    assert client.post(f"/api/v1/lamp-types/{lt.id}/retire", headers=writer).status_code == 200
    after = _fit(client, lt.id, writer)
    for key in ("n_failures", "n_removed", "n_in_service", "n_censored"):
        assert after[key] == before[key], key
    assert after["choice"]["method"] == before["choice"]["method"]
    # In-service lamps age by the milliseconds between the two reads: equal to 1e-6.
    for key in ("shape", "scale_h"):
        assert after["mle"][key] == pytest.approx(before["mle"][key], rel=1e-6)
