"""Lamp positions as numpy arrays for planning: ages, voltages, cycles (one query, no ORM loop).

Uses service.readings.ages.position_ages (burn hours from readings) when that module is
present; otherwise falls back to the register alone: age = hours at install + the area's
scheduled weekly burn hours x weeks since the lamp went in, voltage = the fixture's
measured value or the site's nominal. Either way planning sees the same arrays.
"""

from __future__ import annotations

import importlib
from dataclasses import dataclass
from datetime import datetime
from typing import Any

import numpy as np
from numpy.typing import NDArray
from sqlalchemy import select
from sqlalchemy.orm import Session

from service.db.base import utcnow
from service.register.models import Area, Fixture, LampPosition, Site

FloatArray = NDArray[np.float64]
IntArray = NDArray[np.int64]
HOURS_PER_WEEK = 168.0


@dataclass(frozen=True)
class PositionArrays:
    """One entry per lamp position (burn hours, volts)."""

    position_id: IntArray
    fixture_id: IntArray
    area_id: IntArray
    lamp_type_id: IntArray
    age_h: FloatArray  # burn hours of the lamp now in the socket
    starts: FloatArray  # starts of that lamp
    voltage_v: FloatArray  # operating voltage, volts
    burned_out: NDArray[np.bool_]
    burn_h_per_week: FloatArray  # the area's burn rate (schedule, else measured), hours/week
    source: str  # "readings" or "register schedule"

    @property
    def size(self) -> int:
        """Number of positions."""
        return int(self.position_id.size)


def _from_readings(
    session: Session, site_id: int | None, area_id: int | None, at: datetime
) -> PositionArrays | None:
    try:
        mod: Any = importlib.import_module("service.readings.ages")
    except ModuleNotFoundError:
        return None
    fn = getattr(mod, "position_ages", None)
    if fn is None:
        return None
    pa = fn(session, site_id=site_id, area_id=area_id, at=at)
    return PositionArrays(
        position_id=np.asarray(pa.position_id, dtype=np.int64),
        fixture_id=np.asarray(pa.fixture_id, dtype=np.int64),
        area_id=np.asarray(pa.area_id, dtype=np.int64),
        lamp_type_id=np.asarray(pa.lamp_type_id, dtype=np.int64),
        age_h=np.asarray(pa.age_h, dtype=np.float64),
        starts=np.asarray(pa.starts, dtype=np.float64),
        voltage_v=np.asarray(pa.voltage_v, dtype=np.float64),
        burned_out=np.asarray(pa.burned_out, dtype=bool),
        burn_h_per_week=np.asarray(pa.burn_h_per_week, dtype=np.float64),
        source="readings",
    )


def _from_register(
    session: Session, site_id: int | None, area_id: int | None, at: datetime
) -> PositionArrays:
    stmt = (
        select(
            LampPosition.id,
            LampPosition.fixture_id,
            Fixture.area_id,
            Fixture.lamp_type_id,
            LampPosition.lamp_installed_at,
            LampPosition.hours_at_install,
            LampPosition.starts_at_install,
            LampPosition.burned_out_at,
            Fixture.measured_voltage_v,
            Site.nominal_voltage_v,
            Area.weekly_burn_hours,
            Area.hours_per_day,
            Area.days_per_week,
            Area.starts_per_day,
        )
        .join(Fixture, Fixture.id == LampPosition.fixture_id)
        .join(Area, Area.id == Fixture.area_id)
        .join(Site, Site.id == Area.site_id)
        .order_by(LampPosition.id)
    )
    if site_id is not None:
        stmt = stmt.where(Area.site_id == site_id)
    if area_id is not None:
        stmt = stmt.where(Fixture.area_id == area_id)
    rows = session.execute(stmt).all()
    n = len(rows)
    if n == 0:
        e = np.empty(0, dtype=np.int64)
        f = np.empty(0, dtype=np.float64)
        return PositionArrays(e, e, e, e, f, f, f, np.empty(0, dtype=bool), f, "register schedule")
    cols = list(zip(*rows, strict=True))
    at_ts = at.timestamp()
    installed = np.fromiter(
        (r.timestamp() if r.tzinfo else r.replace(tzinfo=at.tzinfo).timestamp() for r in cols[4]),
        dtype=np.float64,
        count=n,
    )
    weeks = np.maximum(at_ts - installed, 0.0) / (HOURS_PER_WEEK * 3600.0)

    def fl(values: tuple[Any, ...]) -> FloatArray:
        return np.array([np.nan if v is None else v for v in values], dtype=np.float64)

    weekly = fl(cols[10])
    hpd, dpw = fl(cols[11]), fl(cols[12])
    weekly = np.where(np.isnan(weekly), np.nan_to_num(hpd * dpw, nan=0.0), weekly)
    starts_week = fl(cols[13]) * np.where(np.isnan(dpw), 7.0, dpw)
    measured = fl(cols[8])
    return PositionArrays(
        position_id=np.asarray(cols[0], dtype=np.int64),
        fixture_id=np.asarray(cols[1], dtype=np.int64),
        area_id=np.asarray(cols[2], dtype=np.int64),
        lamp_type_id=np.asarray(cols[3], dtype=np.int64),
        age_h=fl(cols[5]) + weekly * weeks,
        starts=fl(cols[6]) + starts_week * weeks,
        voltage_v=np.where(np.isnan(measured), fl(cols[9]), measured),
        burned_out=np.array([v is not None for v in cols[7]], dtype=bool),
        burn_h_per_week=weekly,
        source="register schedule",
    )


def load_positions(
    session: Session,
    *,
    site_id: int | None = None,
    area_id: int | None = None,
    at: datetime | None = None,
) -> PositionArrays:
    """Every lamp position of a site or an area, as arrays at a moment (default now)."""
    when = at or utcnow()
    got = _from_readings(session, site_id, area_id, when)
    return got if got is not None else _from_register(session, site_id, area_id, when)
