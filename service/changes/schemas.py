"""Change feed bodies: one change, one page of the feed."""

from __future__ import annotations

from datetime import datetime
from enum import StrEnum
from typing import Any

from pydantic import BaseModel, Field


class ResourceType(StrEnum):
    """The resources the feed tracks (migration 0011 TRACKED must list the same)."""

    SITE = "site"
    AREA = "area"
    FIXTURE = "fixture"
    LAMP_POSITION = "lamp_position"
    LAMP_TYPE = "lamp_type"
    BURNOUT_REPORT = "burnout_report"
    WORK_ORDER = "work_order"
    WORK_ORDER_LINE = "work_order_line"
    WEEKLY_RUN = "weekly_run"


class ChangeKind(StrEnum):
    """What happened to the resource."""

    CREATED = "created"
    UPDATED = "updated"
    STATE_CHANGED = "state_changed"
    RETIRED = "retired"
    DELETED = "deleted"


class ChangeRead(BaseModel):
    """One change: the resource, what happened, its new version and body (None if deleted)."""

    cursor: str = Field(description="Opaque; pass as `after` to read the changes after this one.")
    id: int = Field(description="The change's id: the event id of its webhook deliveries.")
    resource_type: ResourceType
    resource_id: int
    kind: ChangeKind
    version: int | None = Field(description="The resource's version counter, if it has one.")
    changed_at: datetime
    body: dict[str, Any] | None = Field(
        description="The resource's stored columns at this version; null for a deletion."
    )


class ChangePage(BaseModel):
    """Changes in visibility order; `next_cursor` continues after the last one."""

    items: list[ChangeRead]
    next_cursor: str | None = Field(
        description="Pass as `after` next time (the `after` given when there is nothing new)."
    )
    has_more: bool
