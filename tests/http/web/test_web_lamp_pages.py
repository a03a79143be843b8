"""Lamp catalogue pages: the list with the curve in use, a type's field-fit chart."""

from __future__ import annotations

import json
import re
from datetime import timedelta

import pytest
from fastapi.testclient import TestClient
from sqlalchemy import select
from sqlalchemy.orm import Session

from service.db.base import utcnow
from service.events.models import LampRemoval
from service.register.models import LampPosition
from service.users import service as users
from tests.factories import plan_area, plan_fixtures, plan_lamp_type, plan_site

PASSWORD = "correct horse battery"


def _sign_in(client: TestClient, db: Session, name: str) -> None:
    users.create_user(db, name, name, "viewer", PASSWORD)
    db.commit()
    r = client.post(
        "/sign-in", data={"username": name, "password": PASSWORD}, follow_redirects=False
    )
    assert r.status_code == 303


def _type_with_removals(db: Session, records: list[tuple[float, bool]]) -> int:
    """A lamp type whose only field records are these (normalised hours, failed) removals."""
    s = plan_site(db)
    a = plan_area(db, s)
    lt = plan_lamp_type(db, code="KM-<1>")
    (fx,) = plan_fixtures(db, a, lt, 1, lamps=1)
    pos = db.scalars(select(LampPosition).where(LampPosition.fixture_id == fx.id)).one()
    now = utcnow()
    pos.burned_out_at = now  # the lamp in it is dark: no live (censored) record from it
    for hours, failed in records:
        db.add(
            LampRemoval(
                site_id=s.id,
                fixture_id=fx.id,
                position_id=pos.id,
                lamp_type_id=lt.id,
                installed_at=now - timedelta(hours=hours),
                removed_at=now,
                burn_hours=hours,
                normalised_hours=hours,
                failed=failed,
                reason="burnout" if failed else "group_relamp",
                created_at=now,
            )
        )
    db.commit()
    return lt.id


def test_field_fit_chart_holds_kaplan_meier_steps(client: TestClient, db: Session) -> None:
    """Kaplan and Meier (1958), product-limit: failures at 1000 and 2000 h, a censoring at
    3000 h and a failure at 4000 h give S = 3/4, 1/2, 1/2 and 0."""
    type_id = _type_with_removals(db, [(1000, True), (2000, True), (3000, False), (4000, True)])
    _sign_in(client, db, "km")
    r = client.get(f"/app/lamp-types/{type_id}")
    assert r.status_code == 200
    assert "KM-&lt;1&gt;" in r.text and "KM-<1>" not in r.text
    raw = re.search(r'class="chart-data">(.*?)</script>', r.text)
    assert raw
    spec = json.loads(raw.group(1))
    labels = [s["label"] for s in spec["series"]]
    km = labels.index("Kaplan-Meier (field records)")
    assert spec["series"][km]["stepped"] is True
    x, steps = spec["data"][0], spec["data"][km + 1]
    at = {t: steps[x.index(t)] for t in (1000.0, 2000.0, 3000.0, 4000.0)}
    assert at == pytest.approx({1000.0: 0.75, 2000.0: 0.5, 3000.0: 0.5, 4000.0: 0.0})
    assert steps[0] == 1.0
    assert "Catalogue Weibull" in labels and "Fitted Weibull (field MLE)" in labels
    assert "3 failures and 1 censored" in r.text


def test_catalogue_list_and_missing_type(client: TestClient, db: Session) -> None:
    type_id = _type_with_removals(db, [(1500, True)])
    _sign_in(client, db, "cat")
    r = client.get("/app/lamp-types")
    assert r.status_code == 200
    assert f'href="/app/lamp-types/{type_id}"' in r.text
    assert client.get("/app/lamp-types/999999").status_code == 404
