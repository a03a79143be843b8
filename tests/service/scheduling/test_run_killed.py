"""A weekly run killed with SIGKILL mid-transaction: reaped as failed, then the week re-runs
to exactly one set of orders. Both databases (a database of the test's own)."""

from __future__ import annotations

import os
import signal
import socket
import subprocess
import sys
import time
from collections.abc import Iterator
from datetime import datetime, timedelta
from pathlib import Path

import pytest
from sqlalchemy import Engine, func, select
from sqlalchemy.orm import Session, sessionmaker

from service.db.base import utcnow
from service.db.session import make_engine
from service.scheduling.models import RunOutcome, RunWeek, WeeklyRun
from service.scheduling.runner import REAPED_ERROR, reap_expired_runs, run_site_week
from service.workorders.models import WorkOrder
from tests.scheduling.test_weekly_run import portfolio

ROOT = Path(__file__).resolve().parents[3]
WEEK = "2026-W49"

# The child: run the week with a 2 s lease, and block inside the run's transaction (at the
# flush of the week's claim) on a file that never appears, until the parent kills it.
CHILD = """
import sys, time
from pathlib import Path
from sqlalchemy import event
from sqlalchemy.orm import sessionmaker
from service.db.session import make_engine
from service.scheduling.models import RunWeek
from service.scheduling.runner import run_site_week

url, site_id, week, never = sys.argv[1], int(sys.argv[2]), sys.argv[3], Path(sys.argv[4])
factory = sessionmaker(bind=make_engine(url), expire_on_commit=False)

@event.listens_for(factory, "after_flush")
def hold(session, _ctx):
    if any(isinstance(o, RunWeek) for o in session.new):
        print("holding", flush=True)
        while not never.exists():
            time.sleep(0.05)

run_site_week(factory, site_id, week=week, trigger="schedule", lease_seconds=2.0)
"""


@pytest.fixture()
def own_engine(own_db_url: str) -> Iterator[Engine]:
    """An engine on the test's own database."""
    eng = make_engine(own_db_url)
    yield eng
    eng.dispose()


def _orders(db: Session) -> int:
    return db.scalar(select(func.count()).select_from(WorkOrder)) or 0


def _await_heartbeat(factory: sessionmaker[Session], run_id: int, first: datetime | None) -> None:
    """Wait until the child's heartbeat thread has renewed the lease (in its own commit)."""
    deadline = time.monotonic() + 60  # generous: a loaded machine only delays the beat
    while time.monotonic() < deadline:
        with factory() as db:
            beat = db.scalar(select(WeeklyRun.heartbeat_at).where(WeeklyRun.id == run_id))
        if beat is not None and first is not None and beat > first:
            return
        time.sleep(0.05)
    raise AssertionError("the running child never renewed its lease")


def test_killed_run_is_reaped_and_the_week_reruns(
    own_db_url: str, own_engine: Engine, tmp_path: Path
) -> None:
    with Session(own_engine, expire_on_commit=False) as db:
        site_id = portfolio(db)["site"].id
    child = subprocess.Popen(
        [sys.executable, "-c", CHILD, own_db_url, str(site_id), WEEK, str(tmp_path / "never")],
        cwd=ROOT,
        stdout=subprocess.PIPE,
        stderr=subprocess.PIPE,
        text=True,
    )
    try:
        assert child.stdout is not None
        assert child.stdout.readline().strip() == "holding", child.stderr.read()  # type: ignore[union-attr]
        factory = sessionmaker(bind=own_engine, expire_on_commit=False)
        with factory() as db:
            run = db.scalars(select(WeeklyRun)).one()
            assert (
                run.outcome == RunOutcome.RUNNING
                and run.owner == f"{socket.gethostname()}:{child.pid}"
            )
            assert run.lease_expires_at is not None
        if own_engine.dialect.name == "postgresql":  # SQLite: the run holds the write lock
            _await_heartbeat(factory, run.id, run.heartbeat_at)
            assert reap_expired_runs(factory) == 0  # alive and leased: left alone
    finally:
        os.kill(child.pid, signal.SIGKILL)
        child.wait(timeout=60)
    assert child.returncode == -signal.SIGKILL
    with factory() as db:
        assert db.scalars(select(WeeklyRun.outcome)).all() == [RunOutcome.RUNNING]  # stuck
        assert _orders(db) == 0 and db.scalar(select(func.count()).select_from(RunWeek)) == 0
    assert reap_expired_runs(factory, now=utcnow() + timedelta(seconds=3)) == 1
    with factory() as db:
        dead = db.get(WeeklyRun, run.id)
        assert dead is not None and dead.outcome == RunOutcome.FAILED
        assert dead.error == REAPED_ERROR and dead.finished_at is not None
    again = run_site_week(factory, site_id, week=WEEK, trigger="catch_up")
    assert again.outcome == RunOutcome.SUCCEEDED and again.orders_created == 2
    with factory() as db:
        assert _orders(db) == 2
        kinds = db.scalars(select(WorkOrder.kind).order_by(WorkOrder.kind)).all()
        assert kinds == ["group_relamp", "spot_replacement"]
        outcomes = db.scalars(select(WeeklyRun.outcome).order_by(WeeklyRun.id)).all()
        assert outcomes == [RunOutcome.FAILED, RunOutcome.SUCCEEDED]
