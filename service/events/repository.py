"""Queries for burnout reports and lamp removals."""

from __future__ import annotations

from typing import Any

from sqlalchemy import Select, select

from service.db.crud import filtered
from service.events.models import BurnoutReport, LampRemoval

REPORT_SORT = {"id": BurnoutReport.id, "reported_at": BurnoutReport.reported_at}
REMOVAL_SORT = {"id": LampRemoval.id, "removed_at": LampRemoval.removed_at}


def report_query(
    site_id: int | None = None,
    area_id: int | None = None,
    status: str | None = None,
    position_id: int | None = None,
) -> Select[Any]:
    """Burnout reports filtered by site, area, status and position."""
    r = BurnoutReport
    by = [r.site_id, r.area_id, r.status, r.position_id]
    values = (site_id, area_id, status, position_id)
    return filtered(select(r), equal=list(zip(by, values, strict=True)))


def removal_query(
    site_id: int | None = None,
    lamp_type_id: int | None = None,
    failed: bool | None = None,
    position_id: int | None = None,
) -> Select[Any]:
    """Lamp removals filtered by site, lamp type, outcome and position."""
    r = LampRemoval
    by = [r.site_id, r.lamp_type_id, r.failed, r.position_id]
    values = (site_id, lamp_type_id, failed, position_id)
    return filtered(select(r), equal=list(zip(by, values, strict=True)))
