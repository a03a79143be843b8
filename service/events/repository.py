"""Queries for burnout reports and lamp removals."""

from __future__ import annotations

from typing import Any

from sqlalchemy import Select, select

from service.events.models import BurnoutReport, LampRemoval

REPORT_SORT = {"id": BurnoutReport.id, "reported_at": BurnoutReport.reported_at}
REMOVAL_SORT = {"id": LampRemoval.id, "removed_at": LampRemoval.removed_at}


def report_query(
    site_id: int | None, area_id: int | None, status: str | None, position_id: int | None
) -> Select[Any]:
    """Burnout reports filtered by site, area, status and position."""
    stmt = select(BurnoutReport)
    if site_id is not None:
        stmt = stmt.where(BurnoutReport.site_id == site_id)
    if area_id is not None:
        stmt = stmt.where(BurnoutReport.area_id == area_id)
    if status is not None:
        stmt = stmt.where(BurnoutReport.status == status)
    if position_id is not None:
        stmt = stmt.where(BurnoutReport.position_id == position_id)
    return stmt


def removal_query(
    site_id: int | None, lamp_type_id: int | None, failed: bool | None, position_id: int | None
) -> Select[Any]:
    """Lamp removals filtered by site, lamp type, outcome and position."""
    stmt = select(LampRemoval)
    if site_id is not None:
        stmt = stmt.where(LampRemoval.site_id == site_id)
    if lamp_type_id is not None:
        stmt = stmt.where(LampRemoval.lamp_type_id == lamp_type_id)
    if failed is not None:
        stmt = stmt.where(LampRemoval.failed.is_(failed))
    if position_id is not None:
        stmt = stmt.where(LampRemoval.position_id == position_id)
    return stmt
