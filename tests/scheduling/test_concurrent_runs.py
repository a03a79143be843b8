"""Two processes start the same site's week at once on PostgreSQL: one set of orders."""

from __future__ import annotations

import json
import os
import subprocess
import sys
from collections.abc import Iterator
from pathlib import Path

import pytest
from sqlalchemy import func, select, text
from sqlalchemy.engine import make_url
from sqlalchemy.orm import Session

from service.db.session import make_engine
from service.scheduling.models import WeeklyRun
from service.workorders.models import WorkOrder
from tests.conftest import migrate
from tests.scheduling.test_weekly_run import portfolio

ROOT = Path(__file__).resolve().parents[2]


@pytest.fixture()
def scratch_url() -> Iterator[str]:
    """A PostgreSQL database of its own, created and dropped around the test."""
    base = make_url(os.environ["TEST_DATABASE_URL"])
    name = f"scratch_runs_{os.getpid()}"
    admin = make_engine(base.set(database="postgres").render_as_string(hide_password=False))
    with admin.connect().execution_options(isolation_level="AUTOCOMMIT") as conn:
        conn.execute(text(f'DROP DATABASE IF EXISTS "{name}"'))
        conn.execute(text(f'CREATE DATABASE "{name}"'))
    try:
        yield base.set(database=name).render_as_string(hide_password=False)
    finally:
        with admin.connect().execution_options(isolation_level="AUTOCOMMIT") as conn:
            conn.execute(text(f'DROP DATABASE IF EXISTS "{name}" WITH (FORCE)'))
        admin.dispose()


@pytest.mark.postgres_only
def test_two_processes_create_exactly_one_set(scratch_url: str) -> None:
    engine = make_engine(scratch_url)
    migrate(engine)
    with Session(engine, expire_on_commit=False) as db:
        site_id = portfolio(db)["site"].id
    engine.dispose()
    args = [sys.executable, "-m", "tests.scheduling.concurrent_run"]
    procs = [
        subprocess.Popen(
            [*args, scratch_url, str(site_id), "2026-W49"],
            cwd=ROOT,
            stdin=subprocess.PIPE,
            stdout=subprocess.PIPE,
            stderr=subprocess.PIPE,
            text=True,
        )
        for _ in range(2)
    ]
    for p in procs:  # both imported and connected ...
        assert p.stdout is not None and p.stdout.readline().strip() == "ready"
    for p in procs:  # ... then both released at once
        assert p.stdin is not None
        p.stdin.write("go\n")
        p.stdin.flush()
    results = []
    for p in procs:
        out, err = p.communicate(timeout=120)
        assert p.returncode == 0, err
        results.append(json.loads(out.strip().splitlines()[-1]))
    assert [r["outcome"] for r in results] == ["succeeded", "succeeded"]
    assert sorted(r["created"] for r in results) == [0, 2]
    engine = make_engine(scratch_url)
    with Session(engine) as db:
        kinds = db.execute(
            select(WorkOrder.kind, func.count()).group_by(WorkOrder.kind).order_by(WorkOrder.kind)
        ).all()
        assert [tuple(k) for k in kinds] == [("group_relamp", 1), ("spot_replacement", 1)]
        runs = db.scalars(select(WeeklyRun).order_by(WeeklyRun.id)).all()
        assert len(runs) == 2 and {r.outcome for r in runs} == {"succeeded"}
        # Both really ran at the same time: each started before the other finished.
        a, b_ = runs
        assert a.finished_at is not None and b_.finished_at is not None
        assert a.started_at < b_.finished_at and b_.started_at < a.finished_at
    engine.dispose()
