"""Lamp positions as numpy arrays for planning: ages, voltages, burn rates (no ORM loop).

A thin view over service.readings.ages.position_ages (burn hours from readings, else the
area's schedule; voltage from readings, else the fixture's measured value, else the site's
nominal), keeping only what planning and the weekly run use.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from datetime import datetime

import numpy as np
from numpy.typing import NDArray
from sqlalchemy.orm import Session

from service.db.base import utcnow
from service.readings.ages import PositionAges, position_ages

FloatArray = NDArray[np.float64]
IntArray = NDArray[np.int64]


@dataclass(frozen=True)
class PositionArrays:
    """One entry per lamp position (burn hours, volts)."""

    position_id: IntArray
    fixture_id: IntArray
    area_id: IntArray
    lamp_type_id: IntArray
    ballast_kind: NDArray[np.str_]  # the fixture's ballast kind
    age_h: FloatArray  # burn hours of the lamp now in the socket
    starts: FloatArray  # starts of that lamp
    voltage_v: FloatArray  # operating voltage, volts
    burned_out: NDArray[np.bool_]
    burn_h_per_week: FloatArray  # the area's burn rate (schedule, else measured), hours/week
    source: str  # where ages came from
    # When each lamp went in, epoch seconds (UTC): planning.group_age reads clusters of them.
    installed_at_s: FloatArray = field(default_factory=lambda: np.zeros(0))

    @property
    def size(self) -> int:
        """Number of positions."""
        return int(self.position_id.size)


def load_positions(
    session: Session,
    *,
    site_id: int | None = None,
    area_id: int | None = None,
    at: datetime | None = None,
) -> PositionArrays:
    """Every lamp position of a site or an area, as arrays at a moment (default now)."""
    pa = position_ages(
        session, site_id=site_id, area_id=area_id, at=at or utcnow(), active_only=True
    )
    return from_ages(pa)


def from_ages(pa: PositionAges) -> PositionArrays:
    """The planning view of position ages (positions loaded once, e.g. for a portfolio)."""
    return PositionArrays(
        position_id=np.asarray(pa.position_id, dtype=np.int64),
        fixture_id=np.asarray(pa.fixture_id, dtype=np.int64),
        area_id=np.asarray(pa.area_id, dtype=np.int64),
        lamp_type_id=np.asarray(pa.lamp_type_id, dtype=np.int64),
        ballast_kind=pa.ballast_kind,
        age_h=np.asarray(pa.age_h, dtype=np.float64),
        starts=np.asarray(pa.starts, dtype=np.float64),
        voltage_v=np.asarray(pa.voltage_v, dtype=np.float64),
        burned_out=np.asarray(pa.burned_out, dtype=bool),
        burn_h_per_week=np.asarray(pa.burn_h_per_week, dtype=np.float64),
        source="readings and schedules",
        installed_at_s=np.asarray(pa.installed_at_s, dtype=np.float64),
    )
