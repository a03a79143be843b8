"""The one module of test data: ORM builders, the planning world, and API builders.

- `site`, `area`, `lamp_type`, `fixtures`: small fixed records straight through the ORM
  (an incandescent lamp type, fixtures installed at T0).
- `plan_site`, `plan_area`, `plan_lamp_type`, `plan_fixtures`: numbered records for
  planning, work orders and runs (a linear fluorescent type, lamps in ten weeks ago).
- `api_site`, `api_area`, `api_lamp_type`, `api_fixture`, `api_world`: the same through
  the HTTP API, returning the response bodies.
"""

from __future__ import annotations

from datetime import UTC, datetime, timedelta
from typing import Any

from fastapi.testclient import TestClient
from sqlalchemy.orm import Session

from service.catalogue.models import LampType
from service.db.base import utcnow
from service.register.fixtures import lamp_ballast
from service.register.models import Area, Fixture, LampPosition, Site

T0 = datetime(2025, 1, 1, tzinfo=UTC)


def site(db: Session, name: str = "Test Works", **over: Any) -> Site:
    """A site at 230 V nominal in Lisbon."""
    s = Site(
        name=name,
        time_zone=over.pop("time_zone", "Europe/Lisbon"),
        nominal_voltage_v=over.pop("nominal_voltage_v", 230.0),
        currency="EUR",
        energy_price_per_kwh=0.2,
        labour_rate_per_h=40.0,
        **over,
    )
    db.add(s)
    db.flush()
    return s


def area(db: Session, s: Site, name: str = "Hall", **over: Any) -> Area:
    """An area burning 84 h a week (12 h x 7 days, one start a day) unless told otherwise."""
    params: dict[str, Any] = {"hours_per_day": 12.0, "days_per_week": 7.0, "starts_per_day": 1.0}
    params.update(over)
    a = Area(site_id=s.id, name=name, **params)
    db.add(a)
    db.flush()
    return a


def lamp_type(db: Session, code: str = "INC-100", **over: Any) -> LampType:
    """An incandescent lamp type: 1,000 h B50 at 230 V, beta 3.5, life exponent 13."""
    params: dict[str, Any] = {
        "technology": "incandescent",
        "rated_watts": 100.0,
        "rated_volts": 230.0,
        "rated_life_h": 1000.0,
        "weibull_shape": 3.5,
        "life_exponent": 13.0,
    }
    params.update(over)
    lt = LampType(code=code, **params)
    db.add(lt)
    db.flush()
    return lt


def fixtures(
    db: Session,
    a: Area,
    lt: LampType,
    count: int = 1,
    *,
    lamps: int = 1,
    installed_at: datetime = T0,
    tag: str = "F",
    **over: Any,
) -> list[Fixture]:
    """Fixtures with their positions, lamps all put in at installed_at."""
    out = []
    for i in range(count):
        f = Fixture(
            site_id=a.site_id,
            area_id=a.id,
            tag=f"{tag}{a.id}-{i}",
            lamp_type_id=lt.id,
            lamps_per_fixture=lamps,
            **over,
        )
        db.add(f)
        db.flush()
        for n in range(1, lamps + 1):
            db.add(LampPosition(fixture_id=f.id, position_no=n, lamp_installed_at=installed_at))
        out.append(f)
    db.flush()
    return out


def two_fixture_area(db: Session, **area_over: Any) -> tuple[Any, Any, Any, list[Any]]:
    """A site, an area (area_over overrides), a lamp type, two fixtures of two lamps; committed."""
    s = site(db)
    a = area(db, s, **area_over)
    lt = lamp_type(db)
    fixtures_ = fixtures(db, a, lt, 2, lamps=2)
    db.commit()
    return s, a, lt, fixtures_


def iso_days(days: float) -> str:
    """T0 plus some days, as ISO 8601 with offset."""
    return (T0 + timedelta(days=days)).isoformat()


# The planning world: numbered names, round-number tariffs, lamps in ten weeks ago.
_seq = iter(range(1, 10_000_000))


def plan_site(db: Session, **over: Any) -> Site:
    """A site with round-number tariffs."""
    n = next(_seq)
    s = Site(
        **{
            "name": f"Test Works {n}",
            "time_zone": "Europe/Lisbon",
            "nominal_voltage_v": 230.0,
            "currency": "EUR",
            "energy_price_per_kwh": 0.2,
            "labour_rate_per_h": 40.0,
            "disposal_fee_per_mercury_lamp": 0.5,
            "weekly_run_weekday": 0,
            "weekly_run_time": "06:00",
            "lookahead_weeks": 4,
            **over,
        }
    )
    db.add(s)
    db.flush()
    return s


def plan_lamp_type(db: Session, **over: Any) -> LampType:
    """A linear fluorescent type unless overridden."""
    n = next(_seq)
    lt = LampType(
        **{
            "code": f"T8-TEST-{n}",
            "technology": "linear_fluorescent",
            "rated_watts": 32.0,
            "rated_volts": 230.0,
            "rated_life_h": 24_000.0,
            "rated_percentile": 50.0,
            "weibull_shape": 5.0,
            "unit_price": 4.0,
            "contains_mercury": True,
            "rupture_risk": False,
            **over,
        }
    )
    db.add(lt)
    db.flush()
    return lt


def plan_area(db: Session, s: Site, **over: Any) -> Area:
    """A ladder-access area burning 60 h a week, 1 start a day, 7 days."""
    n = next(_seq)
    a = Area(
        **{
            "site_id": s.id,
            "name": f"Hall {n}",
            "access_method": "ladder",
            "group_minutes_per_lamp": 4.0,
            "spot_minutes_per_lamp": 30.0,
            "equipment_hire_per_visit": 0.0,
            "weekly_burn_hours": 60.0,
            "starts_per_day": 1.0,
            **over,
        }
    )
    db.add(a)
    db.flush()
    return a


def plan_fixtures(
    db: Session,
    a: Area,
    lt: LampType,
    n: int,
    *,
    lamps: int = 2,
    installed_at: datetime | None = None,
    hours_at_install: float = 0.0,
    location: str | None = None,
    volts: float | None = None,
    ballast_kind: str | None = None,
) -> list[Fixture]:
    """n fixtures with `lamps` positions each, lamps in since installed_at."""
    when = installed_at or (utcnow() - timedelta(weeks=10))
    out = []
    for _ in range(n):
        k = next(_seq)
        f = Fixture(
            site_id=a.site_id,
            area_id=a.id,
            tag=f"F-{k}",
            location=location or f"Bay {k % 3}",
            lamp_type_id=lt.id,
            lamps_per_fixture=lamps,
            # None: the lamp type's own ballast, as the register defaults it on create.
            ballast_kind=ballast_kind or lamp_ballast(lt),
            measured_voltage_v=volts,
        )
        f.positions = [
            LampPosition(
                position_no=i + 1,
                lamp_installed_at=when,
                hours_at_install=hours_at_install,
                starts_at_install=0.0,
            )
            for i in range(lamps)
        ]
        db.add(f)
        out.append(f)
    db.flush()
    return out


# Through the HTTP API: each returns the 201 body.
SITE: dict[str, Any] = {
    "name": "Harbourside Depot",
    "time_zone": "Europe/Lisbon",
    "nominal_voltage_v": 230,
    "currency": "EUR",
    "energy_price_per_kwh": 0.21,
    "labour_rate_per_h": 38.0,
    "disposal_fee_per_mercury_lamp": 0.6,
}


def api_site(client: TestClient, headers: dict[str, str], **over: Any) -> dict[str, Any]:
    """Create a site through the API and return its body."""
    r = client.post("/api/v1/sites", json={**SITE, **over}, headers=headers)
    assert r.status_code == 201, r.text
    return r.json()


LAMP_TYPE: dict[str, Any] = {
    "code": "T8-58",
    "technology": "linear_fluorescent",
    "rated_watts": 58,
    "rated_volts": 230,
    "rated_life_h": 24000,
}


def api_area(
    client: TestClient, headers: dict[str, str], site_id: int, **over: Any
) -> dict[str, Any]:
    """Create an area through the API and return its body."""
    body = {"site_id": site_id, "name": "Main Hall", "access_method": "lift", **over}
    r = client.post("/api/v1/areas", json=body, headers=headers)
    assert r.status_code == 201, r.text
    return r.json()


def api_lamp_type(client: TestClient, headers: dict[str, str], **over: Any) -> dict[str, Any]:
    """Create a lamp type through the API and return its body."""
    r = client.post("/api/v1/lamp-types", json={**LAMP_TYPE, **over}, headers=headers)
    assert r.status_code == 201, r.text
    return r.json()


def api_fixture(
    client: TestClient, headers: dict[str, str], area_id: int, lamp_type_id: int, **over: Any
) -> dict[str, Any]:
    """Create a fixture through the API and return its body."""
    body = {"area_id": area_id, "lamp_type_id": lamp_type_id, "tag": "F-001", **over}
    r = client.post("/api/v1/fixtures", json=body, headers=headers)
    assert r.status_code == 201, r.text
    return r.json()


def api_world(client: TestClient, headers: dict[str, str]) -> dict[str, Any]:
    """A site with two areas and two lamp types, plus a second site with one area."""
    site = api_site(client, headers)
    other = api_site(client, headers, name="Quarry Annex")
    return {
        "site": site,
        "other": other,
        "hall": api_area(client, headers, site["id"]),
        "yard": api_area(client, headers, site["id"], name="Yard", access_method="ladder"),
        "annex": api_area(client, headers, other["id"], name="Annex Floor"),
        "t8": api_lamp_type(client, headers),
        "led": api_lamp_type(client, headers, code="LED-20", technology="led", rated_watts=20),
    }
