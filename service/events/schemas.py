"""Request and response bodies for burnout reports and lamp removals."""

from __future__ import annotations

from datetime import datetime
from typing import Literal

from pydantic import BaseModel, ConfigDict, Field

from service.api.ids import Id
from service.api.times import Timestamp

RemovalReason = Literal["burnout", "group_relamp", "spot_relamp", "damage", "upgrade", "other"]


class BurnoutReportCreate(BaseModel):
    """A lamp found dark: which position, when, and its burn hours if known."""

    model_config = ConfigDict(extra="forbid", allow_inf_nan=False)

    position_id: Id
    reported_at: Timestamp
    burn_hours: float | None = Field(
        default=None, ge=0, le=1_000_000, description="Burn hours, if known."
    )
    note: str | None = Field(default=None, max_length=500)
    replaced: bool = Field(default=False, description="A new lamp went in at once.")


class BurnoutReportRead(BaseModel):
    """A stored burnout report: open (dark), ordered (in a spot order) or closed."""

    model_config = ConfigDict(from_attributes=True)

    id: int
    site_id: int
    area_id: int
    fixture_id: int
    position_id: int
    reported_at: datetime
    burn_hours: float | None
    status: str
    work_order_id: int | None
    removal_id: int | None
    note: str | None
    closed_at: datetime | None
    created_at: datetime
    version: int = Field(description="Record version; the ETag, and what If-Match compares.")


class LampRemovalCreate(BaseModel):
    """A lamp taken out of a position; a new one goes in at removed_at."""

    model_config = ConfigDict(extra="forbid", allow_inf_nan=False)

    position_id: Id
    removed_at: Timestamp
    failed: bool = Field(description="True if the lamp was dark (failure), else censored.")
    reason: RemovalReason
    burn_hours: float | None = Field(
        default=None, ge=0, le=1_000_000, description="Burn hours, if known."
    )
    work_order_id: Id | None = None


class LampRemovalRead(BaseModel):
    """A survival observation: a lamp's burn hours, voltage and normalised hours at removal."""

    model_config = ConfigDict(from_attributes=True)

    id: int
    site_id: int
    fixture_id: int
    position_id: int
    lamp_type_id: int
    installed_at: datetime
    removed_at: datetime
    burn_hours: float
    starts: float | None
    operating_voltage_v: float | None
    normalised_hours: float
    failed: bool
    reason: str
    work_order_id: int | None
    created_at: datetime
