"""HTTP routes for burnout reports and lamp removals."""

from __future__ import annotations

from typing import Literal

from fastapi import APIRouter, Request, Response, status

from service.api.auth import ReadKey, SessionDep, WriteKey
from service.api.ids import IdPath, IdQuery
from service.api.pagination import Page, PageDep, page_of, paginate
from service.api.preconditions import locate, versioned
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


@router.post(
    "/burnout-reports", response_model=BurnoutReportRead, status_code=status.HTTP_201_CREATED
)
def create_burnout_report(
    body: BurnoutReportCreate,
    session: SessionDep,
    _: WriteKey,
    request: Request,
    response: Response,
) -> BurnoutReportRead:
    """Report a dark lamp: records one failure observation; open until replaced."""
    report = burnouts.report_burnout(session, **body.model_dump())
    locate(request, response, "get_burnout_report", report_id=report.id)
    return BurnoutReportRead.model_validate(report)


@router.get("/burnout-reports", response_model=Page[BurnoutReportRead])
def list_burnout_reports(
    session: SessionDep,
    _: ReadKey,
    page: PageDep,
    site_id: IdQuery = None,
    area_id: IdQuery = None,
    status: Literal["open", "ordered", "closed"] | None = None,
    position_id: IdQuery = None,
) -> Page[BurnoutReportRead]:
    """List burnout reports (sort: id, reported_at)."""
    stmt = repo.report_query(site_id, area_id, status, position_id)
    rows, total = paginate(session, stmt, page, repo.REPORT_SORT, BurnoutReport.id)
    return page_of(BurnoutReportRead, rows, total, page)


@router.get(
    "/burnout-reports/{report_id}",
    response_model=BurnoutReportRead,
    dependencies=[versioned(BurnoutReport, "report_id")],
)
def get_burnout_report(report_id: IdPath, session: SessionDep, _: ReadKey) -> BurnoutReportRead:
    """Read one burnout report."""
    return BurnoutReportRead.model_validate(
        get_or_404(session, BurnoutReport, report_id, "burnout report")
    )


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


@router.get("/lamp-removals", response_model=Page[LampRemovalRead])
def list_lamp_removals(
    session: SessionDep,
    _: ReadKey,
    page: PageDep,
    site_id: IdQuery = None,
    lamp_type_id: IdQuery = None,
    failed: bool | None = None,
    position_id: IdQuery = None,
) -> Page[LampRemovalRead]:
    """List lamp removals, the field fit's observations (sort: id, removed_at)."""
    stmt = repo.removal_query(site_id, lamp_type_id, failed, position_id)
    rows, total = paginate(session, stmt, page, repo.REMOVAL_SORT, LampRemoval.id)
    return page_of(LampRemovalRead, rows, total, page)
