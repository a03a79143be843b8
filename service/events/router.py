"""HTTP routes for burnout reports and lamp removals."""

from __future__ import annotations

from typing import Literal

from fastapi import APIRouter, Request, Response, status
from sqlalchemy.orm import Session

from service.api.auth import SessionDep, WriteKey
from service.api.ids import IdQuery
from service.api.resource_routes import Resource
from service.db.crud import get_or_404
from service.events import burnouts, removals
from service.events import repository as repo
from service.events.models import BurnoutReport, LampRemoval
from service.events.schemas import (
    BurnoutReportCreate,
    BurnoutReportRead,
    LampRemovalCreate,
    LampRemovalRead,
)
from service.register.models import LampPosition

router = APIRouter(tags=["events"])
REPORT = Resource(
    collection="/burnout-reports", id_name="report_id", model=BurnoutReport, read=BurnoutReportRead
)
REMOVAL = Resource(
    collection="/lamp-removals", id_name="removal_id", model=LampRemoval, read=LampRemovalRead
)


def _report(session: Session, body: BurnoutReportCreate) -> BurnoutReport:
    return burnouts.report_burnout(session, **body.model_dump())


def _get_report(session: Session, report_id: int) -> BurnoutReport:
    return get_or_404(session, BurnoutReport, report_id, "burnout report")


REPORT.create_route(
    router,
    ("create_burnout_report", "get_burnout_report"),
    "Report a dark lamp: records one failure observation; open until replaced.",
    BurnoutReportCreate,
    _report,
)
REPORT.list_route(
    router,
    "list_burnout_reports",
    "List burnout reports (sort: id, reported_at).",
    {
        "site_id": IdQuery,
        "area_id": IdQuery,
        "status": Literal["open", "ordered", "closed"] | None,
        "position_id": IdQuery,
    },
    (repo.report_query, repo.REPORT_SORT),
)
REPORT.get_route(router, "get_burnout_report", "Read one burnout report.", _get_report)


@router.post("/lamp-removals", response_model=LampRemovalRead, status_code=status.HTTP_201_CREATED)
def create_lamp_removal(
    body: LampRemovalCreate, session: SessionDep, _: WriteKey, request: Request, response: Response
) -> LampRemovalRead:
    """Record a lamp taken out (failed or still burning); the position restarts at zero."""
    position = get_or_404(session, LampPosition, body.position_id, "lamp position")
    removal = removals.record_removal(
        session,
        position,
        removed_at=body.removed_at,
        failed=body.failed,
        reason=body.reason,
        work_order_id=body.work_order_id,
        burn_hours=body.burn_hours,
    )
    # No single-removal route: Location is the list, filtered to the position.
    response.headers["Location"] = (
        f"{request.url_for('list_lamp_removals')}?position_id={position.id}"
    )
    return LampRemovalRead.model_validate(removal)


REMOVAL.list_route(
    router,
    "list_lamp_removals",
    "List lamp removals, the field fit's observations (sort: id, removed_at).",
    {
        "site_id": IdQuery,
        "lamp_type_id": IdQuery,
        "failed": bool | None,
        "position_id": IdQuery,
    },
    (repo.removal_query, repo.REMOVAL_SORT),
)
