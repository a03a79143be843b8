"""HTTP routes for weekly runs: list the records, start one for a site."""

from __future__ import annotations

from typing import Annotated

from fastapi import APIRouter, Query, Request, Response, status

from service.api.auth import ReadKey, SessionDep, WriteKey
from service.api.errors import Invalid
from service.api.ids import IdPath, IdQuery
from service.api.pagination import Page, PageDep, page_of, paginate
from service.db.crud import get_or_404
from service.db.session import JobFactoryDep, writes_in_jobs
from service.scheduling import repository as repo
from service.scheduling.models import RunOutcome, WeeklyRun
from service.scheduling.runner import run_site_week
from service.scheduling.schemas import RunRead, RunStart
from service.scheduling.weeks import parse_week

router = APIRouter(tags=["weekly runs"])


@router.get("/runs", response_model=Page[RunRead])
def list_runs(
    session: SessionDep,
    _: ReadKey,
    page: PageDep,
    site_id: IdQuery = None,
    iso_week: Annotated[str | None, Query(pattern=r"^\d{4}-W\d{2}$")] = None,
    outcome: RunOutcome | None = None,
) -> Page[RunRead]:
    """Every weekly run (scheduled, caught up, started by hand), newest first by default."""
    stmt = repo.run_query(site_id=site_id, iso_week=iso_week, outcome=outcome)
    rows, total = paginate(session, stmt, page, repo.RUN_SORT, WeeklyRun.id.desc())
    return page_of(RunRead, rows, total, page)


@router.get("/runs/{run_id}", response_model=RunRead)
def get_run(run_id: IdPath, session: SessionDep, _: ReadKey) -> RunRead:
    """One run record."""
    return RunRead.model_validate(get_or_404(session, WeeklyRun, run_id, "run"))


@router.post("/sites/{site_id}/runs", response_model=RunRead, status_code=status.HTTP_201_CREATED)
@writes_in_jobs  # the run commits in its own transactions; this request's session only reads
def start_run(
    site_id: IdPath,
    jobs: JobFactoryDep,
    _: WriteKey,
    request: Request,
    response: Response,
    body: RunStart | None = None,
) -> RunRead:
    """Run a site's weekly issue now (write scope; safe to repeat: a week never gets twice)."""
    week = body.week if body else None
    if week is not None:
        try:
            parse_week(week)
        except ValueError as exc:
            raise Invalid(
                str(exc), errors=[{"field": "week", "in": "body", "message": str(exc)}]
            ) from exc
    run = run_site_week(jobs, site_id, week=week, trigger="api")  # 404 for an unknown site
    response.headers["Location"] = str(request.url_for("get_run", run_id=run.id))
    return RunRead.model_validate(run)
