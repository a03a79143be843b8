"""Queries for work orders."""

from __future__ import annotations

from collections.abc import Sequence
from datetime import datetime
from typing import Any

from sqlalchemy import Select, func, select
from sqlalchemy.orm import Session

from service.db.crud import ListQuery, sort_columns
from service.workorders.models import WorkOrder

ORDER_SORT = sort_columns(WorkOrder, "id", "due_on", "updated_at", "created_at", "state")


_ORDER_FILTERS = ListQuery(
    WorkOrder, equal=("external_reference", "site_id", "area_id", "state", "kind", "iso_week")
)


def order_query(*, changed_since: datetime | None = None, **filters: Any) -> Select[Any]:
    """Orders filtered; changed_since keeps those updated (state changes included) at or after."""
    stmt = _ORDER_FILTERS(**filters)
    if changed_since is not None:
        stmt = stmt.where(WorkOrder.updated_at >= changed_since)
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
