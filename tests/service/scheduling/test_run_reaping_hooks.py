"""Where reaping happens: scheduler start-up and sync ticks, and `lampkeeper runs reap`;
plus the one-process skip of a site already running and the lease migration round trip."""

from __future__ import annotations

import threading
from datetime import UTC, datetime, timedelta
from pathlib import Path

import pytest
from alembic import command
from sqlalchemy import Engine, inspect
from sqlalchemy.orm import Session, sessionmaker

from service import cli
from service.api.health import alembic_config
from service.db.base import utcnow
from service.db.session import make_engine
from service.scheduling import cli as runs_cli
from service.scheduling import runner
from service.scheduling.models import RunOutcome, WeeklyRun
from service.scheduling.runner import REAPED_ERROR, run_due_week
from service.scheduling.scheduler import WeeklyScheduler
from tests.conftest import migrate
from tests.factories import plan_site


def migrate_down(engine: Engine, revision: str) -> None:
    """Run the Alembic downgrades to a revision on this engine."""
    cfg = alembic_config()
    cfg.attributes["configure_logger"] = False
    with engine.begin() as conn:
        cfg.attributes["connection"] = conn
        command.downgrade(cfg, revision)


def _dead_run(db: Session, site_id: int) -> WeeklyRun:
    run = WeeklyRun(
        site_id=site_id,
        iso_week="2026-W49",
        trigger="schedule",
        started_at=utcnow() - timedelta(minutes=10),
        outcome=RunOutcome.RUNNING,
        lease_expires_at=utcnow() - timedelta(minutes=8),
        owner="gone:4242",
    )
    db.add(run)
    db.commit()
    return run


def _outcome(db: Session, run_id: int) -> tuple[str, str | None]:
    db.expire_all()
    got = db.get(WeeklyRun, run_id)
    assert got is not None
    return got.outcome, got.error


def test_sync_tick_reaps(db: Session, factory: sessionmaker[Session]) -> None:
    dead = _dead_run(db, plan_site(db).id)
    WeeklyScheduler(factory).sync()  # the tick the scheduler runs every SYNC_SECONDS
    assert _outcome(db, dead.id) == (RunOutcome.FAILED, REAPED_ERROR)


def test_start_reaps_before_catching_up(db: Session, factory: sessionmaker[Session]) -> None:
    dead = _dead_run(db, plan_site(db).id)
    sched = WeeklyScheduler(factory, feed_jobs=False)  # one shared connection
    sched.catch_up = lambda now=None: None  # type: ignore[method-assign]  # reaping only here
    sched.start()
    try:
        assert _outcome(db, dead.id) == (RunOutcome.FAILED, REAPED_ERROR)
    finally:
        sched.shutdown()


def test_reap_failure_does_not_break_the_tick(
    factory: sessionmaker[Session], monkeypatch: pytest.MonkeyPatch
) -> None:
    def down(*_: object, **__: object) -> int:
        raise RuntimeError("database away")

    monkeypatch.setattr("service.scheduling.scheduler.reap_expired_runs", down)
    assert WeeklyScheduler(factory).reap() == 0


def test_cli_reap(
    db: Session,
    factory: sessionmaker[Session],
    monkeypatch: pytest.MonkeyPatch,
    capsys: pytest.CaptureFixture[str],
) -> None:
    dead = _dead_run(db, plan_site(db).id)
    monkeypatch.setattr(runs_cli, "session_factory", lambda: factory)
    assert cli.main(["runs", "reap"]) == 0
    assert "1 expired run(s) marked failed" in capsys.readouterr().out
    assert _outcome(db, dead.id) == (RunOutcome.FAILED, REAPED_ERROR)
    assert cli.main(["runs", "reap"]) == 0  # run twice: nothing more
    assert "0 expired run(s)" in capsys.readouterr().out


def test_due_week_skips_a_site_this_process_is_running(tmp_path: Path) -> None:
    # The per-site thread lock is SQLite's guard (PostgreSQL's row lock is tested in
    # test_replica_catch_up), so this runs on a SQLite file of its own in every pass.
    engine = make_engine(f"sqlite:///{tmp_path / 'own.sqlite3'}")
    migrate(engine)
    factory = sessionmaker(bind=engine, expire_on_commit=False)
    with factory() as db:
        s = plan_site(db, created_at=datetime.now(UTC) - timedelta(days=30))
        db.commit()
        site_id = s.id
    held, release = threading.Event(), threading.Event()

    def other_thread() -> None:  # another scheduler thread mid-run on the same site
        with runner._site_lock(site_id):
            held.set()
            release.wait(60)

    t = threading.Thread(target=other_thread)
    t.start()
    try:
        assert held.wait(60)
        assert run_due_week(factory, site_id) is None  # not awaited: skipped at once
    finally:
        release.set()
        t.join()
    first = run_due_week(factory, site_id)
    assert first is not None and first.outcome == RunOutcome.SUCCEEDED
    assert run_due_week(factory, site_id) is None  # the week succeeded: nothing to do
    engine.dispose()


def test_lease_migration_round_trip(tmp_path: Path) -> None:
    engine = make_engine(f"sqlite:///{tmp_path / 'm.sqlite3'}")
    cols = {"lease_expires_at", "heartbeat_at", "owner"}
    migrate(engine)
    assert cols <= {c["name"] for c in inspect(engine).get_columns("weekly_runs")}
    migrate_down(engine, "0005")
    assert not cols & {c["name"] for c in inspect(engine).get_columns("weekly_runs")}
    migrate(engine)
    assert cols <= {c["name"] for c in inspect(engine).get_columns("weekly_runs")}
    engine.dispose()
