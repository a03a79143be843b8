"""Weekly run pages: the recent runs and a form to start a site's run now (planner and up)."""

from __future__ import annotations

from typing import Annotated

from fastapi import APIRouter, Form, Request
from fastapi.responses import HTMLResponse, Response
from sqlalchemy import select

from service.api.auth import SessionDep
from service.db.session import JobFactoryDep, writes_in_jobs
from service.register.models import Site
from service.scheduling.models import WeeklyRun
from service.scheduling.runner import run_site_week
from service.web import queries
from service.web.auth import VisitorDep, check_post
from service.web.pages import page, see_other

router = APIRouter(include_in_schema=False)
RECENT_RUNS = 100  # runs listed, newest first


@router.get("/app/runs", response_class=HTMLResponse)
def runs_page(
    request: Request, session: SessionDep, visitor: VisitorDep, started: int | None = None
) -> HTMLResponse:
    """The most recent weekly runs with their outcome and the orders they made."""
    runs = session.scalars(select(WeeklyRun).order_by(WeeklyRun.id.desc()).limit(RECENT_RUNS)).all()
    return page(
        request,
        "runs.html",
        visitor=visitor,
        runs=runs,
        sites=queries.site_names(session),
        started=started,
    )


@router.post("/app/runs", response_class=HTMLResponse)
@writes_in_jobs  # the run commits in its own transactions; this request's session only reads
def start_run(
    request: Request,
    session: SessionDep,
    jobs: JobFactoryDep,
    visitor: VisitorDep,
    site_id: Annotated[int, Form(ge=1, le=2**31 - 1)],
    csrf_token: Annotated[str, Form(max_length=1000)] = "",
) -> Response:
    """Run a site's weekly issue now, as POST /sites/{id}/runs does (a week never runs twice)."""
    check_post(visitor, csrf_token, "start_run")
    if session.get(Site, site_id) is None:
        return page(
            request, "message.html", 404, visitor=visitor, title="No such site",
            message=f"There is no site {site_id}.",
        )  # fmt: skip
    run = run_site_week(jobs, site_id, trigger="api")
    return see_other(f"/app/runs?started={run.id}")
