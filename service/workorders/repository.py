"""Queries for work orders."""

from __future__ import annotations

from collections.abc import Sequence
from datetime import datetime
from typing import Any

from sqlalchemy import Select, func, select
from sqlalchemy.orm import Session

from service.db.crud import filtered
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
    external_reference: str | None = None,
) -> Select[Any]:
    """Orders filtered; changed_since keeps those updated (state changes included) at or after."""
    o = WorkOrder
    by = [o.external_reference, o.site_id, o.area_id, o.state, o.kind, o.iso_week]
    values = (external_reference, site_id, area_id, state, kind, iso_week)
    stmt = filtered(select(o), equal=list(zip(by, values, strict=True)))
    if changed_since is not None:
        stmt = stmt.where(o.updated_at >= changed_since)
    return stmt


def last_group_relamps(session: Session, area_ids: Sequence[int]) -> dict[int, datetime]:
    """When each area's last group relamp was completed."""
    if not area_ids:
        return {}
    stmt = (
        select(WorkOrder.area_id, func.max(WorkOrder.completed_at))
        .where(WorkOrder.kind == "group_relamp", WorkOrder.state == "done")
        .where(WorkOrder.area_id.in_(list(area_ids)))
        .group_by(WorkOrder.area_id)
    )
    return {a: t for a, t in session.execute(stmt).all() if t is not None}
