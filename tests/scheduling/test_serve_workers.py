"""`lampkeeper serve --workers N`: how many, refused on SQLite, and one scheduler in all.

Several uvicorn workers on PostgreSQL: the supervising process starts the one scheduler and
the workers are started with LAMPKEEPER_SCHEDULER_ENABLED=false, so N workers never mean N
schedulers. (That two schedulers, as two replicas would be, run a site's week once is
tests/service/scheduling/test_replica_catch_up.py.)
"""

from __future__ import annotations

import argparse
from typing import Any

import pytest

from service import cli
from service.config import get_settings

PG = "postgresql+psycopg://u@127.0.0.1:5432/x"


def test_worker_count_defaults() -> None:
    assert cli.worker_count(3, None, PG) == 3  # the option wins
    assert cli.worker_count(None, 2, PG) == 2  # then LAMPKEEPER_WORKERS
    assert cli.worker_count(None, None, "sqlite:///x.sqlite3") == 1  # SQLite: one process
    assert cli.worker_count(None, None, PG) >= 1  # PostgreSQL: the machine's cores


def _args(workers: int | None) -> argparse.Namespace:
    return argparse.Namespace(host=None, port=None, print_demo_key=False, workers=workers)


@pytest.fixture()
def recorded(monkeypatch: pytest.MonkeyPatch) -> dict[str, Any]:
    """uvicorn.run and the scheduler start replaced by recorders."""
    import uvicorn

    import service.scheduling.scheduler as sched

    seen: dict[str, Any] = {"schedulers": 0, "stopped": 0}

    class FakeScheduler:
        def shutdown(self) -> None:
            seen["stopped"] += 1

    def start() -> FakeScheduler:
        seen["schedulers"] += 1
        return FakeScheduler()

    def run(app: str, **kw: Any) -> None:
        import os

        seen["run"] = kw
        seen["child_scheduler"] = os.environ.get("LAMPKEEPER_SCHEDULER_ENABLED")

    monkeypatch.setattr(uvicorn, "run", run)
    monkeypatch.setattr(sched, "start_scheduler", start)
    monkeypatch.delenv("LAMPKEEPER_SCHEDULER_ENABLED", raising=False)
    return seen


def test_several_workers_share_one_scheduler(
    recorded: dict[str, Any], monkeypatch: pytest.MonkeyPatch
) -> None:
    monkeypatch.setenv("LAMPKEEPER_DATABASE_URL", PG)
    get_settings.cache_clear()
    try:
        assert cli.cmd_serve(_args(2)) == 0
    finally:
        get_settings.cache_clear()
    assert recorded["run"]["workers"] == 2
    assert recorded["schedulers"] == 1 and recorded["stopped"] == 1  # in the supervisor only
    assert recorded["child_scheduler"] == "false"  # the workers start none


def test_one_worker_keeps_the_scheduler_in_the_app(
    recorded: dict[str, Any], monkeypatch: pytest.MonkeyPatch
) -> None:
    monkeypatch.setenv("LAMPKEEPER_DATABASE_URL", PG)
    get_settings.cache_clear()
    try:
        assert cli.cmd_serve(_args(1)) == 0
    finally:
        get_settings.cache_clear()
    assert recorded["run"]["workers"] == 1
    assert recorded["schedulers"] == 0 and recorded["child_scheduler"] is None


def test_several_workers_are_refused_on_sqlite(
    recorded: dict[str, Any], monkeypatch: pytest.MonkeyPatch, capsys: pytest.CaptureFixture[str]
) -> None:
    monkeypatch.setenv("LAMPKEEPER_DATABASE_URL", "sqlite:///var/x.sqlite3")
    get_settings.cache_clear()
    try:
        assert cli.cmd_serve(_args(2)) == 2
    finally:
        get_settings.cache_clear()
    assert "run" not in recorded and "PostgreSQL" in capsys.readouterr().out
