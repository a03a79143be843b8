"""Queries for work orders."""

from __future__ import annotations

from datetime import datetime
from typing import Any

from sqlalchemy import Select, select

from service.workorders.models import WorkOrder

ORDER_SORT = {
    "id": WorkOrder.id,
    "due_on": WorkOrder.due_on,
    "updated_at": WorkOrder.updated_at,
    "created_at": WorkOrder.created_at,
    "state": WorkOrder.state,
}


def order_query(
    *,
    site_id: int | None = None,
    area_id: int | None = None,
    state: str | None = None,
    kind: str | None = None,
    iso_week: str | None = None,
    changed_since: datetime | None = None,
) -> Select[Any]:
    """Orders filtered; changed_since keeps those updated (state changes included) at or after."""
    stmt = select(WorkOrder)
    if site_id is not None:
        stmt = stmt.where(WorkOrder.site_id == site_id)
    if area_id is not None:
        stmt = stmt.where(WorkOrder.area_id == area_id)
    if state is not None:
        stmt = stmt.where(WorkOrder.state == state)
    if kind is not None:
        stmt = stmt.where(WorkOrder.kind == kind)
    if iso_week is not None:
        stmt = stmt.where(WorkOrder.iso_week == iso_week)
    if changed_since is not None:
        stmt = stmt.where(WorkOrder.updated_at >= changed_since)
    return stmt
