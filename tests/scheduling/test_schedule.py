"""The schedule: local-time firing across DST, re-scheduling on site edits, catch-up at start."""

from __future__ import annotations

import threading
from datetime import UTC, datetime, timedelta
from zoneinfo import ZoneInfo

from apscheduler.events import EVENT_JOB_ERROR, EVENT_JOB_EXECUTED, JobExecutionEvent
from sqlalchemy import select
from sqlalchemy.orm import Session, sessionmaker

from service.scheduling.models import WeeklyRun
from service.scheduling.runner import run_site_week
from service.scheduling.scheduler import WeeklyScheduler, job_id
from service.scheduling.weeks import iso_week_of, last_fire_time, weekly_trigger
from tests.factories import plan_area, plan_fixtures, plan_lamp_type, plan_site
from tests.scheduling.faults import fail_before_lines

LISBON = ZoneInfo("Europe/Lisbon")


def test_fires_at_local_time_across_spring_dst() -> None:
    # Portugal moves from WET (UTC+0) to WEST (UTC+1) on Sunday 29 March 2026
    # (EU rule: last Sunday of March, IANA tz database).
    trig = weekly_trigger(0, "06:00", "Europe/Lisbon")  # Mondays 06:00 local
    now = datetime(2026, 3, 20, 12, 0, tzinfo=UTC)  # a Friday, controlled clock
    first = trig.get_next_fire_time(None, now)
    assert first is not None
    second = trig.get_next_fire_time(first, first + timedelta(seconds=1))
    assert second is not None
    assert first.astimezone(UTC) == datetime(2026, 3, 23, 6, 0, tzinfo=UTC)  # WET
    assert second.astimezone(UTC) == datetime(2026, 3, 30, 5, 0, tzinfo=UTC)  # WEST
    assert first.astimezone(LISBON).hour == second.astimezone(LISBON).hour == 6


def test_fires_at_local_time_across_autumn_dst_in_another_zone() -> None:
    # US clocks fall back on Sunday 1 November 2026 (EDT UTC-4 -> EST UTC-5).
    trig = weekly_trigger(4, "22:30", "America/New_York")  # Fridays 22:30 local
    now = datetime(2026, 10, 28, 0, 0, tzinfo=UTC)
    first = trig.get_next_fire_time(None, now)
    assert first is not None
    second = trig.get_next_fire_time(first, first + timedelta(seconds=1))
    assert second is not None
    assert first.astimezone(UTC) == datetime(2026, 10, 31, 2, 30, tzinfo=UTC)  # Fri 30 Oct EDT
    assert second.astimezone(UTC) == datetime(2026, 11, 7, 3, 30, tzinfo=UTC)  # Fri 6 Nov EST


def test_last_fire_time_agrees_with_the_trigger() -> None:
    now = datetime(2026, 4, 2, 9, 0, tzinfo=UTC)
    last = last_fire_time(0, "06:00", "Europe/Lisbon", now)
    assert last.astimezone(UTC) == datetime(2026, 3, 30, 5, 0, tzinfo=UTC)
    trig = weekly_trigger(0, "06:00", "Europe/Lisbon")
    assert trig.get_next_fire_time(None, last - timedelta(seconds=1)) == last
    assert trig.get_next_fire_time(None, now) == last + timedelta(days=7)
    # Exactly at the fire time counts as that week's run.
    assert last_fire_time(0, "06:00", "Europe/Lisbon", last) == last


def _started(factory: sessionmaker[Session]) -> WeeklyScheduler:
    sched = WeeklyScheduler(factory)
    sched.scheduler.start(paused=True)  # jobs go in the store; nothing fires
    return sched


def test_site_edits_reschedule_the_job(db: Session, factory: sessionmaker[Session]) -> None:
    s = plan_site(db, weekly_run_weekday=2, weekly_run_time="07:15", time_zone="Asia/Tokyo")
    db.commit()
    sched = _started(factory)
    try:
        sched.sync()
        job = sched.scheduler.get_job(job_id(s.id))
        assert job is not None
        now = datetime(2026, 5, 1, 0, 0, tzinfo=UTC)
        nxt = job.trigger.get_next_fire_time(None, now)
        assert nxt.astimezone(ZoneInfo("Asia/Tokyo")).strftime("%a %H:%M") == "Wed 07:15"
        s.weekly_run_time = "18:45"
        s.time_zone = "Europe/Lisbon"
        db.commit()
        sched.sync()
        job = sched.scheduler.get_job(job_id(s.id))
        nxt = job.trigger.get_next_fire_time(None, now)
        assert nxt.astimezone(LISBON).strftime("%a %H:%M") == "Wed 18:45"
        db.delete(s)
        db.commit()
        sched.sync()
        assert sched.scheduler.get_job(job_id(s.id)) is None
    finally:
        sched.scheduler.shutdown(wait=False)


def test_missed_runs_are_found_and_caught_up_at_start(
    db: Session, factory: sessionmaker[Session]
) -> None:
    now = datetime.now(UTC)
    long_ago = now - timedelta(days=30)
    old = plan_site(db, created_at=long_ago)
    lt = plan_lamp_type(db)
    plan_fixtures(db, plan_area(db, old), lt, 2, hours_at_install=20_000.0)
    plan_site(db)  # created just now: its last scheduled moment predates it, nothing to catch up
    db.commit()
    # The feed jobs would share the test's one connection from their own thread.
    sched = WeeklyScheduler(factory, feed_jobs=False)
    week = iso_week_of(last_fire_time(0, "06:00", "Europe/Lisbon", now).date())
    assert sched.missed(now) == [(old.id, week)]

    done = threading.Event()
    seen: list[JobExecutionEvent] = []

    def listener(event: JobExecutionEvent) -> None:
        if event.job_id.startswith("catch-up-"):
            seen.append(event)
            done.set()

    sched.scheduler.add_listener(listener, EVENT_JOB_EXECUTED | EVENT_JOB_ERROR)
    sched.start()  # schedules every site, then runs the missed week at once
    try:
        assert done.wait(30), "the catch-up run did not happen"
    finally:
        sched.shutdown()
    assert seen[0].exception is None
    run = db.scalars(select(WeeklyRun).where(WeeklyRun.site_id == old.id)).one()
    assert (run.trigger, run.iso_week, run.outcome) == ("catch_up", week, "succeeded")
    assert run.orders_created == 1
    assert sched.missed(now) == []


def test_a_failed_week_is_still_missed(db: Session, factory: sessionmaker[Session]) -> None:
    now = datetime.now(UTC)
    s = plan_site(db, created_at=now - timedelta(days=30))
    db.commit()
    week = iso_week_of(last_fire_time(0, "06:00", "Europe/Lisbon", now).date())

    lt = plan_lamp_type(db)
    plan_fixtures(db, plan_area(db, s), lt, 1, hours_at_install=20_000.0)
    db.commit()
    with fail_before_lines(factory, "down"):
        assert run_site_week(factory, s.id, week=week).outcome == "failed"
    assert WeeklyScheduler(factory).missed(now) == [(s.id, week)]
