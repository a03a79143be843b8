"""Areas carry their luminaire dirt and cleaning: create, read, update, validation."""

from __future__ import annotations

from datetime import datetime

from fastapi.testclient import TestClient
from sqlalchemy import func, select
from sqlalchemy.orm import Session

from service.register.models import Area
from tests import factories as fx


def test_area_dirt_fields_round_trip_with_defaults(
    db: Session, client: TestClient, writer: dict[str, str]
) -> None:
    s = fx.site(db)
    db.commit()
    r = client.post("/api/v1/areas", json={"site_id": s.id, "name": "Open office"}, headers=writer)
    assert r.status_code == 201, r.text
    body = r.json()
    assert body["luminaire_type"] == "enclosed" and body["dirt_environment"] == "clean"
    assert body["cleaning_interval_months"] == 12.0 and body["relamp_includes_cleaning"] is False
    assert body["cleaning_minutes_per_fixture"] == 10.0 and body["last_cleaned_at"] is None
    new = {
        "luminaire_type": "indirect_uplighter",
        "dirt_environment": "dirty",
        "cleaning_interval_months": None,
        "relamp_includes_cleaning": False,
        "cleaning_minutes_per_fixture": 4.5,
        "last_cleaned_at": "2026-03-01T08:00:00+00:00",
    }
    r = client.patch(f"/api/v1/areas/{body['id']}", json=new, headers=writer)
    assert r.status_code == 200, r.text
    got = client.get(f"/api/v1/areas/{body['id']}", headers=writer).json()
    stamp = new.pop("last_cleaned_at")
    assert {k: got[k] for k in new} == new
    assert datetime.fromisoformat(got["last_cleaned_at"]) == datetime.fromisoformat(str(stamp))
    made = client.post(
        "/api/v1/areas",
        json={"site_id": s.id, "name": "Store", "cleaning_interval_months": None},
        headers=writer,
    ).json()
    assert made["cleaning_interval_months"] is None  # cleaned only at group relamps


def test_bad_dirt_fields_are_422_naming_the_field_and_write_nothing(
    db: Session, client: TestClient, writer: dict[str, str]
) -> None:
    s = fx.site(db)
    a = fx.area(db, s)
    db.commit()
    before = db.scalar(select(func.count()).select_from(Area))
    cases = [
        ("post", {"site_id": s.id, "name": "X", "dirt_environment": "muddy"}, "dirt_environment"),
        (
            "post",
            {"site_id": s.id, "name": "X", "cleaning_minutes_per_fixture": -1},
            "cleaning_minutes_per_fixture",
        ),
        ("patch", {"luminaire_type": None}, "luminaire_type"),
        ("patch", {"relamp_includes_cleaning": None}, "relamp_includes_cleaning"),
        ("patch", {"cleaning_interval_months": 500}, "cleaning_interval_months"),
    ]
    for method, payload, field in cases:
        if method == "post":
            r = client.post("/api/v1/areas", json=payload, headers=writer)
        else:
            r = client.patch(f"/api/v1/areas/{a.id}", json=payload, headers=writer)
        assert r.status_code == 422, (payload, r.text)
        assert r.headers["content-type"].startswith("application/problem+json")
        assert field in {e["field"] for e in r.json()["errors"]}, r.text
    assert db.scalar(select(func.count()).select_from(Area)) == before
    db.refresh(a)
    assert a.luminaire_type == "enclosed" and a.cleaning_interval_months == 12.0
