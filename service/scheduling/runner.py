"""The weekly run for one site: claim the week, issue orders, record the run; all or nothing.

Idempotency, three layers:
1. on PostgreSQL a transaction-level advisory lock per site (pg_advisory_xact_lock), so two
   replicas starting the same site's run queue up instead of racing; in one process a
   threading lock per site does the same (SQLite serves one process);
2. a claim row per (site, ISO week) in run_weeks, taken first in the run's transaction;
3. the unique constraint on work orders (site, ISO week, area, kind): orders a week
   already has are skipped, and a racing duplicate fails the whole transaction.
The run's orders, lines, report links and its success record commit in one transaction;
an exception anywhere rolls all of it back and the run is recorded as failed.
"""

from __future__ import annotations

import logging
import threading
from collections.abc import Callable
from datetime import datetime

from sqlalchemy import select
from sqlalchemy.orm import Session, sessionmaker

from service.api.errors import NotFound
from service.db.base import utcnow
from service.db.locks import lock_site
from service.db.session import begin_write
from service.planning.service import local_today
from service.register.models import Site
from service.scheduling.models import RunWeek, WeeklyRun
from service.scheduling.weeks import iso_week_of
from service.workorders.issue import GROUP, SPOT, issue_orders

log = logging.getLogger(__name__)

_local_locks: dict[int, threading.Lock] = {}
_locks_guard = threading.Lock()

Checkpoint = Callable[[str], None]


def _site_lock(site_id: int) -> threading.Lock:
    with _locks_guard:
        return _local_locks.setdefault(site_id, threading.Lock())


def _claim(session: Session, site_id: int, week: str) -> RunWeek:
    claim = session.scalar(
        select(RunWeek).where(RunWeek.site_id == site_id, RunWeek.iso_week == week)
    )
    if claim is None:
        claim = RunWeek(site_id=site_id, iso_week=week)
        session.add(claim)
        session.flush()
    return claim


def run_site_week(
    factory: sessionmaker[Session],
    site_id: int,
    *,
    week: str | None = None,
    trigger: str = "api",
    at: datetime | None = None,
    checkpoint: Checkpoint | None = None,
) -> WeeklyRun:
    """Run the weekly issue for a site and week (default: the site-local current week)."""
    when = at or utcnow()
    with factory() as s:
        begin_write(s)  # SQLite: a read-then-write transaction must start as the writer
        site = s.get(Site, site_id)
        if site is None:
            raise NotFound(f"site {site_id} does not exist.", resource="site", id=site_id)
        week = week or iso_week_of(local_today(site, when))
        run = WeeklyRun(site_id=site_id, iso_week=week, trigger=trigger, started_at=utcnow())
        s.add(run)
        s.commit()
        run_id = run.id
    with _site_lock(site_id):
        try:
            with factory() as s:
                begin_write(s)
                lock_site(s, site_id)
                site = s.get(Site, site_id)
                assert site is not None
                claim = _claim(s, site_id, week)
                result = issue_orders(
                    s,
                    site,
                    at=when,
                    iso_week=week,
                    run_id=run_id,
                    state="issued",
                    lookahead_weeks=site.lookahead_weeks,
                    checkpoint=checkpoint,
                )
                finished = utcnow()
                claim.succeeded_at = finished
                row = s.get(WeeklyRun, run_id)
                assert row is not None
                row.outcome = "succeeded"
                row.finished_at = finished
                row.group_orders = result.count(GROUP)
                row.spot_orders = result.count(SPOT)
                row.orders_created = len(result.created)
                row.orders_already_there = result.already_there
                s.commit()
                return row
        except Exception as exc:
            log.exception("weekly run %s for site %s week %s failed", run_id, site_id, week)
            with factory() as s:
                begin_write(s)
                row = s.get(WeeklyRun, run_id)
                assert row is not None
                row.outcome = "failed"
                row.finished_at = utcnow()
                row.error = f"{type(exc).__name__}: {exc}"[:4000]
                s.commit()
                return row


def week_succeeded(session: Session, site_id: int, week: str) -> bool:
    """True when a run for this site and week has committed."""
    return (
        session.scalar(
            select(RunWeek.id).where(
                RunWeek.site_id == site_id,
                RunWeek.iso_week == week,
                RunWeek.succeeded_at.is_not(None),
            )
        )
        is not None
    )
