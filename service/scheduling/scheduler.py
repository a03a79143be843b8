"""APScheduler 3 set-up: one weekly cron job per site in its own time zone, plus catch-up.

A background job re-reads the sites every SYNC_SECONDS and re-schedules a site whose day,
time or time zone changed (and adds new sites, drops deleted ones), so site edits through
any replica take effect without a restart. At start, a site whose latest scheduled run
(after the site was created) has no successful run record for its ISO week is run at once
("catch_up"). Jobs run in the scheduler's threads with their own sessions.

Scheduled and catch-up jobs go through run_due_week: a site another replica is running, or
whose week already succeeded, is skipped rather than run again. At start and on every sync
tick, running records whose lease expired (their process died) are reaped as failed. The
same scheduler runs a webhook delivery pass every webhook_poll_s and prunes the change
feed daily.
"""

from __future__ import annotations

import logging
from datetime import UTC, datetime
from typing import Any

from apscheduler.schedulers.background import BackgroundScheduler
from sqlalchemy import select
from sqlalchemy.orm import Session, sessionmaker

from service.db.base import utcnow
from service.register.models import Site
from service.scheduling.models import WeeklyRun
from service.scheduling.runner import reap_expired_runs, run_due_week, week_succeeded
from service.scheduling.weeks import iso_week_of, last_fire_time, weekly_trigger
from service.webhooks.worker import Deliverer

log = logging.getLogger(__name__)

SYNC_SECONDS = 60
MISFIRE_GRACE_S = 6 * 3600  # a run up to 6 h late still fires; later ones are caught up


def job_id(site_id: int) -> str:
    """The scheduler job id of a site's weekly run."""
    return f"weekly-run-site-{site_id}"


class WeeklyScheduler:
    """The weekly runs of every site, kept in step with the sites table."""

    def __init__(self, factory: sessionmaker[Session], *, feed_jobs: bool = True) -> None:
        self.factory = factory
        # Webhook delivery and feed pruning; off where the factory shares one connection
        # (a test's savepoints), since their threads would use it at the same moment.
        self.feed_jobs = feed_jobs
        self.scheduler = BackgroundScheduler(timezone=UTC)
        self._specs: dict[int, tuple[int, str, str]] = {}
        self.deliverer: Deliverer | None = None

    def _sites(self) -> list[Any]:
        with self.factory() as s:
            rows = s.execute(
                select(
                    Site.id,
                    Site.time_zone,
                    Site.weekly_run_weekday,
                    Site.weekly_run_time,
                    Site.created_at,
                )
            ).all()
        return list(rows)

    def run_job(self, site_id: int, trigger: str = "schedule") -> None:
        """Job body: the site's run for the current site-local week."""
        try:
            run = run_due_week(self.factory, site_id, trigger=trigger)
            if run is None:
                log.info("weekly run of site %s skipped: done or running elsewhere", site_id)
            else:
                log.info("weekly run %s site %s: %s", run.id, site_id, run.outcome)
        except Exception:  # a deleted site or a database outage must not kill the thread
            log.exception("weekly run for site %s could not start", site_id)

    def reap(self) -> int:
        """Fail the running records whose lease expired; never raises (a sync tick goes on)."""
        try:
            return reap_expired_runs(self.factory)
        except Exception:
            log.exception("reaping expired weekly runs failed")
            return 0

    def sync(self) -> None:
        """Reap dead runs; add, re-schedule or remove site jobs to match the sites table."""
        self.reap()
        seen = set()
        for sid, tz, weekday, hhmm, _ in self._sites():
            seen.add(sid)
            spec = (weekday, hhmm, tz)
            if self._specs.get(sid) == spec:
                continue
            self.scheduler.add_job(
                self.run_job,
                trigger=weekly_trigger(weekday, hhmm, tz),
                args=[sid],
                id=job_id(sid),
                replace_existing=True,
                coalesce=True,
                max_instances=1,
                misfire_grace_time=MISFIRE_GRACE_S,
            )
            self._specs[sid] = spec
        for sid in set(self._specs) - seen:
            if self.scheduler.get_job(job_id(sid)) is not None:
                self.scheduler.remove_job(job_id(sid))
            del self._specs[sid]

    def missed(self, now: datetime | None = None) -> list[tuple[int, str]]:
        """(site, ISO week) of scheduled runs that never succeeded (since the site existed)."""
        when = now or utcnow()
        out = []
        for sid, tz, weekday, hhmm, created in self._sites():
            fire = last_fire_time(weekday, hhmm, tz, when)
            if created is not None and created > fire:
                continue
            week = iso_week_of(fire.date())
            with self.factory() as s:
                if not week_succeeded(s, sid, week):
                    out.append((sid, week))
        return out

    def catch_up(self, now: datetime | None = None) -> None:
        """Run at once every site whose latest scheduled run is missing."""
        for sid, week in self.missed(now):
            log.info("catching up the weekly run of site %s for %s", sid, week)
            self.scheduler.add_job(
                run_due_week,
                args=[self.factory, sid],
                kwargs={"week": week, "trigger": "catch_up"},
                id=f"catch-up-{sid}-{week}",
                replace_existing=True,
                next_run_time=utcnow(),
                misfire_grace_time=None,
            )

    def run_missed(self, now: datetime | None = None) -> list[WeeklyRun]:
        """Catch up in this thread: run each missed site not taken by another worker."""
        runs = []
        for sid, week in self.missed(now):
            run = run_due_week(self.factory, sid, week=week, trigger="catch_up")
            if run is not None:
                runs.append(run)
        return runs

    def prune_changes(self) -> int:
        """Delete change-feed rows past the retention; never raises."""
        from service.changes.service import prune
        from service.db.session import begin_write

        try:
            with self.factory() as s:
                begin_write(s)
                n = prune(s)
                s.commit()
            log.info("change feed: %s changes pruned", n)
            return n
        except Exception:
            log.exception("pruning the change feed failed")
            return 0

    def start_feed_jobs(self) -> None:
        """Webhook deliveries every webhook_poll_s; change-feed pruning daily."""
        from service.config import get_settings

        self.deliverer = Deliverer(self.factory)
        self.scheduler.add_job(
            self.deliverer.run_safely,
            "interval",
            seconds=get_settings().webhook_poll_s,
            id="webhook-deliveries",
            replace_existing=True,
            coalesce=True,
            max_instances=1,
        )
        self.scheduler.add_job(
            self.prune_changes,
            "interval",
            hours=24,
            id="prune-changes",
            replace_existing=True,
            coalesce=True,
            max_instances=1,
            next_run_time=utcnow(),
        )

    def start(self) -> None:
        """Schedule every site, start the threads, catch up missed runs."""
        self.sync()
        self.scheduler.add_job(
            self.sync, "interval", seconds=SYNC_SECONDS, id="sync-sites", replace_existing=True
        )
        if self.feed_jobs:
            self.start_feed_jobs()
        self.scheduler.start()
        self.catch_up()

    def shutdown(self) -> None:
        """Stop the threads (a run in progress finishes its transaction or rolls back)."""
        self.scheduler.shutdown(wait=False)
        if self.deliverer is not None:
            self.deliverer.close()


def start_scheduler() -> WeeklyScheduler:
    """Build and start the app's scheduler on the settings' database."""
    from service.db.session import session_factory

    sched = WeeklyScheduler(session_factory())
    sched.start()
    return sched
