"""Queries for burnout reports and lamp removals."""

from __future__ import annotations

from service.db.crud import ListQuery
from service.events.models import BurnoutReport, LampRemoval

REPORT_SORT = {"id": BurnoutReport.id, "reported_at": BurnoutReport.reported_at}
REMOVAL_SORT = {"id": LampRemoval.id, "removed_at": LampRemoval.removed_at}


#: Burnout reports filtered by site, area, status and position.
report_query = ListQuery(BurnoutReport, equal=("site_id", "area_id", "status", "position_id"))
#: Lamp removals filtered by site, lamp type, outcome and position.
removal_query = ListQuery(LampRemoval, equal=("site_id", "lamp_type_id", "failed", "position_id"))
