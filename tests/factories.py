"""Test data built straight through the ORM: sites, areas, lamp types, fixtures, positions."""

from __future__ import annotations

from datetime import UTC, datetime, timedelta
from typing import Any

from sqlalchemy.orm import Session

from service.catalogue.models import LampType
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
