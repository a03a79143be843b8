"""Run leases: the record carries a lease and owner, heartbeats renew it, the reaper fails
records whose lease expired and leaves live ones alone."""

from __future__ import annotations

import os
import threading
from datetime import timedelta

import pytest
from sqlalchemy import select
from sqlalchemy.orm import Session, sessionmaker

from service.db.base import utcnow
from service.scheduling import runner
from service.scheduling.models import RunOutcome, WeeklyRun
from service.scheduling.runner import (
    REAPED_ERROR,
    Heartbeat,
    reap_expired_runs,
    renew_lease,
    run_owner,
    run_site_week,
)
from tests.factories import plan_area, plan_fixtures, plan_lamp_type, plan_site


def _running(db: Session, site_id: int, *, lease_left_s: float | None) -> WeeklyRun:
    now = utcnow()
    run = WeeklyRun(
        site_id=site_id,
        iso_week="2026-W49",
        trigger="schedule",
        started_at=now - timedelta(minutes=5),
        outcome=RunOutcome.RUNNING,
        heartbeat_at=now,
        lease_expires_at=None if lease_left_s is None else now + timedelta(seconds=lease_left_s),
        owner="elsewhere:1",
    )
    db.add(run)
    db.commit()
    return run


def test_reaper_fails_expired_and_leaves_fresh(db: Session, factory: sessionmaker[Session]) -> None:
    s = plan_site(db)
    dead = _running(db, s.id, lease_left_s=-1)
    alive = _running(db, s.id, lease_left_s=60)
    legacy = _running(db, s.id, lease_left_s=None)  # started 5 min ago, before leases existed
    now = utcnow()
    assert reap_expired_runs(factory, now=now) == 2
    db.expire_all()
    for r in (dead, legacy):
        got = db.get(WeeklyRun, r.id)
        assert got is not None and got.outcome == RunOutcome.FAILED
        assert got.error == REAPED_ERROR and got.finished_at == now
    fresh = db.get(WeeklyRun, alive.id)
    assert fresh is not None and fresh.outcome == RunOutcome.RUNNING and fresh.error is None
    assert reap_expired_runs(factory, now=now) == 0  # a second pass (a retry) changes nothing


def test_finished_runs_are_never_reaped(db: Session, factory: sessionmaker[Session]) -> None:
    s = plan_site(db)
    plan_fixtures(db, plan_area(db, s), plan_lamp_type(db), 2, hours_at_install=20_000.0)
    db.commit()
    run = run_site_week(factory, s.id, lease_seconds=30)
    assert run.outcome == RunOutcome.SUCCEEDED
    assert reap_expired_runs(factory, now=utcnow() + timedelta(days=1)) == 0
    db.expire_all()
    assert db.scalars(select(WeeklyRun.outcome)).all() == [RunOutcome.SUCCEEDED]


def test_run_record_carries_owner_and_lease(db: Session, factory: sessionmaker[Session]) -> None:
    s = plan_site(db)
    db.commit()
    before = utcnow()
    run = run_site_week(factory, s.id, lease_seconds=45)
    assert run.owner == run_owner() and run.owner.endswith(f":{os.getpid()}")
    assert run.heartbeat_at is not None and before <= run.heartbeat_at <= run.started_at
    assert run.lease_expires_at is None  # a finished run holds no lease


def test_renew_lease_moves_only_a_running_record(
    db: Session, factory: sessionmaker[Session]
) -> None:
    s = plan_site(db)
    live = _running(db, s.id, lease_left_s=1)
    before = utcnow()
    renew_lease(factory, live.id, 90)
    db.expire_all()
    got = db.get(WeeklyRun, live.id)
    assert got is not None and got.heartbeat_at is not None and got.heartbeat_at >= before
    assert got.lease_expires_at is not None
    assert got.lease_expires_at - got.heartbeat_at == timedelta(seconds=90)
    got.outcome = RunOutcome.FAILED
    db.commit()
    renew_lease(factory, live.id, 90)  # a late beat after the end must not revive a lease
    db.expire_all()
    done = db.get(WeeklyRun, live.id)
    assert done is not None and done.outcome == RunOutcome.FAILED


def test_heartbeat_beats_until_stopped(monkeypatch: pytest.MonkeyPatch) -> None:
    beats: list[tuple[int, float]] = []
    third = threading.Event()

    def fake_renew(_factory: object, run_id: int, lease: float) -> None:
        beats.append((run_id, lease))
        if len(beats) == 3:
            third.set()

    monkeypatch.setattr(runner, "renew_lease", fake_renew)
    hb = Heartbeat(None, 7, 0.03)  # type: ignore[arg-type]
    hb.start()
    assert third.wait(30)
    hb.stop()
    n = len(beats)
    assert not hb._thread.is_alive() and n >= 3
    assert set(beats) == {(7, 0.03)}


def test_a_failing_beat_does_not_stop_the_heartbeat(monkeypatch: pytest.MonkeyPatch) -> None:
    calls = threading.Semaphore(0)

    def down(_factory: object, _run_id: int, _lease: float) -> None:
        calls.release()
        raise RuntimeError("database away")

    monkeypatch.setattr(runner, "renew_lease", down)
    hb = Heartbeat(None, 1, 0.03)  # type: ignore[arg-type]
    hb.start()
    assert calls.acquire(timeout=30) and calls.acquire(timeout=30)  # tried again after a failure
    hb.stop()
