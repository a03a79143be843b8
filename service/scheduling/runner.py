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

Leases: the run record is committed first (outcome running) with a lease
(run_lease_seconds) and its owner (host:pid); a heartbeat thread renews the lease every
third of it in its own short write transaction. A process killed mid-run stops renewing,
and reap_expired_runs marks its record failed; its work transaction rolled back with it, so
the week counts as not succeeded and is run again.

Replicas: run_due_week (scheduler) first takes the site row with FOR NO KEY UPDATE SKIP
LOCKED on PostgreSQL and holds it for the whole run, so a replica finding a site taken
skips it (no run record) instead of queueing behind the site lock and running it twice.
"""

from __future__ import annotations

import logging
import os
import socket
import threading
import time
from datetime import datetime, timedelta
from typing import Any, cast

from sqlalchemy import CursorResult, and_, or_, select, update
from sqlalchemy.orm import Session, sessionmaker

from service.api.errors import NotFound
from service.api.metrics import observe_run
from service.config import get_settings
from service.db.base import utcnow
from service.db.locks import lock_site
from service.db.session import begin_write
from service.heap import long_lived_frozen
from service.planning.service import local_today
from service.register.models import Site
from service.scheduling.models import RunOutcome, RunWeek, WeeklyRun
from service.scheduling.weeks import iso_week_of
from service.workorders.issue import GROUP, SPOT, issue_orders

log = logging.getLogger(__name__)

# Re-entrant: run_due_week holds the site's lock and then calls run_site_week.
_local_locks: dict[int, threading.RLock] = {}
_locks_guard = threading.Lock()

REAPED_ERROR = "lease expired: the process running it stopped"


def _site_lock(site_id: int) -> threading.RLock:
    with _locks_guard:
        return _local_locks.setdefault(site_id, threading.RLock())


def run_owner() -> str:
    """This process as a run owner: host:pid."""
    return f"{socket.gethostname()}:{os.getpid()}"


def _claim(session: Session, site_id: int, week: str) -> RunWeek:
    claim = session.scalar(
        select(RunWeek).where(RunWeek.site_id == site_id, RunWeek.iso_week == week)
    )
    if claim is None:
        claim = RunWeek(site_id=site_id, iso_week=week)
        session.add(claim)
        session.flush()
    return claim


def renew_lease(factory: sessionmaker[Session], run_id: int, lease_seconds: float) -> None:
    """Push a running run's lease lease_seconds past now, in its own write transaction."""
    now = utcnow()
    with factory() as s:
        begin_write(s)
        s.execute(
            update(WeeklyRun)
            .where(WeeklyRun.id == run_id, WeeklyRun.outcome == RunOutcome.RUNNING)
            .values(heartbeat_at=now, lease_expires_at=now + timedelta(seconds=lease_seconds))
            .execution_options(synchronize_session=False)
        )
        s.commit()


class Heartbeat:
    """A thread renewing a run's lease every third of the lease until stopped."""

    def __init__(self, factory: sessionmaker[Session], run_id: int, lease_seconds: float) -> None:
        self.factory, self.run_id, self.lease_seconds = factory, run_id, lease_seconds
        self._stop = threading.Event()
        self._thread = threading.Thread(
            target=self._beat, name=f"weekly-run-{run_id}-heartbeat", daemon=True
        )

    def _beat(self) -> None:
        while not self._stop.wait(self.lease_seconds / 3):
            try:
                renew_lease(self.factory, self.run_id, self.lease_seconds)
            except Exception:  # a missed beat is retried; the lease covers two more tries
                log.warning("heartbeat of weekly run %s failed", self.run_id, exc_info=True)

    def start(self) -> None:
        """Begin renewing."""
        self._thread.start()

    def stop(self) -> None:
        """Stop renewing and wait for a beat in progress."""
        self._stop.set()
        self._thread.join()


def _start_record(
    factory: sessionmaker[Session],
    site_id: int,
    week: str | None,
    trigger: str,
    when: datetime,
    lease_seconds: float,
) -> tuple[int, str]:
    """Commit the run record (running, leased to this process); return its id and week."""
    with factory() as s:
        begin_write(s)  # SQLite: a read-then-write transaction must start as the writer
        site = s.get(Site, site_id)
        if site is None:
            raise NotFound(f"site {site_id} does not exist.", resource="site", id=site_id)
        week = week or iso_week_of(local_today(site, when))
        now = utcnow()
        run = WeeklyRun(
            site_id=site_id,
            iso_week=week,
            trigger=trigger,
            started_at=now,
            outcome=RunOutcome.RUNNING,
            heartbeat_at=now,
            lease_expires_at=now + timedelta(seconds=lease_seconds),
            owner=run_owner(),
        )
        s.add(run)
        s.commit()
        return run.id, week


def _work(
    factory: sessionmaker[Session], site_id: int, week: str, run_id: int, when: datetime
) -> WeeklyRun:
    """Claim the week, issue its orders and record success, in one transaction."""
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
            # A site set to drafts gets orders a planner issues (which reserves their stock).
            state="draft" if site.weekly_run_drafts else "issued",
            lookahead_weeks=site.lookahead_weeks,
        )
        finished = utcnow()
        claim.succeeded_at = finished
        row = s.get(WeeklyRun, run_id)
        assert row is not None
        # Also over a record reaped meanwhile (heartbeats lost): the orders did commit.
        row.outcome = RunOutcome.SUCCEEDED
        row.finished_at = finished
        row.lease_expires_at = None
        row.group_orders = result.count(GROUP)
        row.spot_orders = result.count(SPOT)
        row.orders_created = len(result.created)
        row.orders_already_there = result.already_there
        s.commit()
        return row


def _record_failure(factory: sessionmaker[Session], run_id: int, exc: Exception) -> WeeklyRun:
    with factory() as s:
        begin_write(s)
        row = s.get(WeeklyRun, run_id)
        assert row is not None
        row.outcome = RunOutcome.FAILED
        row.finished_at = utcnow()
        row.lease_expires_at = None
        row.error = f"{type(exc).__name__}: {exc}"[:4000]
        s.commit()
        return row


def run_site_week(
    factory: sessionmaker[Session],
    site_id: int,
    *,
    week: str | None = None,
    trigger: str = "api",
    at: datetime | None = None,
    lease_seconds: float | None = None,
) -> WeeklyRun:
    """Run the weekly issue for a site and week (default: the site-local current week)."""
    when = at or utcnow()
    lease = lease_seconds or get_settings().run_lease_seconds
    run_id, week = _start_record(factory, site_id, week, trigger, when, lease)
    heartbeat = Heartbeat(factory, run_id, lease)
    heartbeat.start()
    started = time.perf_counter()
    try:
        with _site_lock(site_id), long_lived_frozen():
            row = _work(factory, site_id, week, run_id, when)
        observe_run("succeeded", time.perf_counter() - started, row.orders_created or 0)
        return row
    except Exception as exc:
        log.exception("weekly run %s for site %s week %s failed", run_id, site_id, week)
        heartbeat.stop()  # before the failure record, so no beat renews a finished run
        failed = _record_failure(factory, run_id, exc)
        observe_run("failed", time.perf_counter() - started)
        return failed
    finally:
        heartbeat.stop()


def run_due_week(
    factory: sessionmaker[Session],
    site_id: int,
    *,
    week: str | None = None,
    trigger: str = "catch_up",
    at: datetime | None = None,
    lease_seconds: float | None = None,
) -> WeeklyRun | None:
    """Run a site's week unless another worker holds the site or the week succeeded (None)."""
    with factory() as guard:
        # PostgreSQL: the row lock below excludes other threads and replicas alike. SQLite
        # has no row locks and serves one process: a per-site thread lock, tried, not awaited.
        local = guard.get_bind().dialect.name != "postgresql"
        lock = _site_lock(site_id)
        if local and not lock.acquire(blocking=False):
            return None
        try:
            # FOR NO KEY UPDATE SKIP LOCKED, held until the run ends; the run's inserts take
            # only KEY SHARE on the site row, which this lock allows.
            site = guard.scalar(
                select(Site)
                .where(Site.id == site_id)
                .with_for_update(skip_locked=True, key_share=True)
            )
            if site is None:  # another worker runs it (or the site is gone)
                return None
            week = week or iso_week_of(local_today(site, at or utcnow()))
            if week_succeeded(guard, site_id, week):
                return None
            return run_site_week(
                factory, site_id, week=week, trigger=trigger, at=at, lease_seconds=lease_seconds
            )
        finally:
            guard.commit()  # release the row (test factories: release, not roll back)
            if local:
                lock.release()


def reap_expired_runs(factory: sessionmaker[Session], *, now: datetime | None = None) -> int:
    """Mark failed every running run whose lease expired (its process died); return how many."""
    when = now or utcnow()
    # Records from before leases existed have none: they count as leased from their start.
    legacy_start = when - timedelta(seconds=get_settings().run_lease_seconds)
    with factory() as s:
        begin_write(s)
        result = cast(
            CursorResult[Any],
            s.execute(
                update(WeeklyRun)
                .where(
                    WeeklyRun.outcome == RunOutcome.RUNNING,
                    or_(
                        WeeklyRun.lease_expires_at < when,
                        and_(
                            WeeklyRun.lease_expires_at.is_(None),
                            WeeklyRun.started_at < legacy_start,
                        ),
                    ),
                )
                .values(
                    outcome=RunOutcome.FAILED,
                    error=REAPED_ERROR,
                    finished_at=when,
                    lease_expires_at=None,
                )
                .execution_options(synchronize_session=False)
            ),
        )
        s.commit()
    reaped = int(result.rowcount or 0)
    if reaped:
        log.warning("reaped %s weekly run(s) whose lease expired", reaped)
    return reaped


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
