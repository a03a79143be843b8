"""Weekly run requests and records."""

from __future__ import annotations

from datetime import datetime
from typing import Literal

from pydantic import BaseModel, ConfigDict, Field

from service.scheduling.models import RunOutcome

WeekText = str


class RunStart(BaseModel):
    """Start a site's weekly run now, for its current week or a named ISO week."""

    model_config = ConfigDict(extra="forbid", allow_inf_nan=False)

    week: str | None = Field(
        default=None, pattern=r"^\d{4}-W\d{2}$", description="ISO week, e.g. 2026-W49."
    )


class RunRead(BaseModel):
    """One execution of the weekly run."""

    model_config = ConfigDict(from_attributes=True)

    id: int
    site_id: int
    iso_week: str
    trigger: Literal["schedule", "catch_up", "api", "cli"]
    started_at: datetime
    finished_at: datetime | None
    outcome: RunOutcome
    group_orders: int
    spot_orders: int
    orders_created: int
    orders_already_there: int
    error: str | None
    lease_expires_at: datetime | None
    heartbeat_at: datetime | None
    owner: str | None
