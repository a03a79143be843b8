"""Request and response bodies for burn-hour records, voltage readings and position ages."""

from __future__ import annotations

from datetime import datetime

from pydantic import BaseModel, ConfigDict, Field

from service.api.ids import Id
from service.api.times import Day, Timestamp


class BurnHourCreate(BaseModel):
    """One burn-hour row: a period total (period or day) or a cumulative meter reading.

    Name a fixture or an area. Period total: period_start + period_end (or day, a calendar
    day in the site's zone) with hours and optional starts. Meter reading: read_at with
    counter_hours (and counter_starts); counter_reset when the meter restarted from zero.
    Timestamps without an offset are taken in the site's time zone.
    """

    model_config = ConfigDict(extra="forbid", allow_inf_nan=False)

    fixture_id: Id | None = None
    area_id: Id | None = None
    period_start: Timestamp | None = None
    period_end: Timestamp | None = None
    day: Day | None = None
    hours: float | None = Field(default=None, description="Burn hours in the period.")
    starts: float | None = Field(default=None, description="Starts in the period.")
    read_at: Timestamp | None = None
    counter_hours: float | None = Field(default=None, description="Meter value, burn hours.")
    counter_starts: float | None = Field(default=None, description="Meter value, starts.")
    counter_reset: bool = False


class BurnHourRead(BaseModel):
    """A stored burn-hour record (meter readings stored as the increment since the last)."""

    model_config = ConfigDict(from_attributes=True)

    id: int
    site_id: int
    area_id: int | None
    fixture_id: int | None
    kind: str
    period_start: datetime
    period_end: datetime
    hours: float
    starts: float | None
    counter_hours: float | None
    counter_starts: float | None
    counter_reset: bool
    created_at: datetime


class VoltageReadingCreate(BaseModel):
    """A supply voltage measured at a fixture or on an area's circuit."""

    model_config = ConfigDict(extra="forbid", allow_inf_nan=False)

    fixture_id: Id | None = None
    area_id: Id | None = None
    measured_at: Timestamp
    volts: float
    note: str | None = Field(default=None, max_length=300)


class VoltageReadingRead(BaseModel):
    """A stored voltage reading."""

    model_config = ConfigDict(from_attributes=True)

    id: int
    site_id: int
    area_id: int | None
    fixture_id: int | None
    measured_at: datetime
    volts: float
    note: str | None
    created_at: datetime


class BulkResult(BaseModel):
    """How many rows an upload stored (all of them, or the upload was refused)."""

    stored: int


class PositionAgeRead(BaseModel):
    """A lamp position's current lamp: age, starts, operating voltage and its source."""

    position_id: int
    fixture_id: int
    area_id: int
    site_id: int
    lamp_type_id: int
    lamp_installed_at: datetime
    age_h: float
    starts: float
    hours_per_start: float | None
    voltage_v: float
    voltage_source: str
    burned_out: bool
    burn_h_per_week: float


class PositionAgesPage(BaseModel):
    """A page of position ages at a moment."""

    at: datetime
    items: list[PositionAgeRead]
    total: int
    limit: int
    offset: int
