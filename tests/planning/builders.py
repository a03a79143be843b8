"""Invented test data for planning, work orders and runs, written straight to the database."""

from __future__ import annotations

from datetime import datetime, timedelta
from typing import Any

from sqlalchemy.orm import Session

from service.catalogue.models import LampType
from service.db.base import utcnow
from service.register.fixtures import lamp_ballast
from service.register.models import Area, Fixture, LampPosition, Site

_seq = iter(range(1, 10_000_000))


def site(db: Session, **over: Any) -> Site:
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


def lamp_type(db: Session, **over: Any) -> LampType:
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


def area(db: Session, s: Site, **over: Any) -> Area:
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


def fixtures(
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
