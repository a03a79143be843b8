"""Every bench script runs in quick mode and writes its table rows (no timing is checked)."""

from __future__ import annotations

import json
import os
import socket
import subprocess
import sys
from pathlib import Path

import pytest

# The scripts make their own scratch databases, whatever the suite runs on: run them in the
# SQLite pass of the suite only (CI runs it twice).
pytestmark = pytest.mark.skipif(
    os.environ.get("TEST_DATABASE_URL", "").startswith("postgresql"),
    reason="runs once, in the SQLite pass",
)

ROOT = Path(__file__).resolve().parents[2]
BENCH = ROOT / "benchmarks"
SCRIPTS = sorted(p.stem for p in BENCH.glob("bench_*.py"))

# Scripts that need the local PostgreSQL server (scratch databases of their own names).
NEEDS_PG = {
    "bench_weekly_run",
    "bench_burn_upload",
    "bench_changes",
    "bench_web_pages",
    "bench_demand_db",
}
PG_ARGS = {
    "bench_weekly_run": ["postgresql+psycopg://postgres@127.0.0.1:5432/bench_quick_weekly"],
    "bench_demand_db": ["postgresql+psycopg://postgres@127.0.0.1:5432/bench_quick_demand_db"],
    "bench_changes": ["postgresql+psycopg://postgres@127.0.0.1:5432/bench_quick_changes"],
    "bench_web_pages": ["postgresql+psycopg://postgres@127.0.0.1:5432/bench_quick_web"],
    "bench_burn_upload": ["--scratch", "bench_quick_burn"],
    "bench_import": ["--scratch", "bench_quick_import"],
}


def _pg_up() -> bool:
    try:
        with socket.create_connection(("127.0.0.1", 5432), timeout=1):
            return True
    except OSError:
        return False


def test_every_script_is_listed() -> None:
    # The runner picks up bench_*.py; a new script is covered here without a line of code.
    assert {"bench_renewal", "bench_fleet", "bench_import", "bench_burn_upload"} <= set(SCRIPTS)


@pytest.mark.parametrize("name", SCRIPTS)
def test_quick_run_writes_rows(name: str, tmp_path: Path) -> None:
    pg = _pg_up()
    assert pg or name not in NEEDS_PG, f"{name} needs PostgreSQL on 127.0.0.1:5432 (.ci/run)"
    out = tmp_path / f"{name}.json"
    args = [sys.executable, str(BENCH / f"{name}.py"), "--quick", "--json", str(out)]
    args += PG_ARGS.get(name, []) if pg else []
    if name == "bench_import" and not pg:
        args.append("--no-pg")
    env = {k: v for k, v in os.environ.items() if not k.startswith("LAMPKEEPER_")}
    done = subprocess.run(args, cwd=ROOT, env=env, capture_output=True, text=True, timeout=600)
    assert done.returncode == 0, done.stdout[-2000:] + done.stderr[-3000:]
    doc = json.loads(out.read_text())
    rows = doc["scripts"][name]
    assert doc["quick"] is True
    assert rows, "no table rows"
    for r in rows:
        assert r["figure_s"] > 0
        if r["anchor"] is not None:
            assert r["anchor_s"] > 0
            assert r["ratio"] == pytest.approx(r["figure_s"] / r["anchor_s"])


def test_runner_merges_tables(tmp_path: Path) -> None:
    # run_all merges the scripts' rows into one document (here two quick, database-free ones).
    out = tmp_path / "latest.json"
    done = subprocess.run(
        [
            sys.executable,
            str(BENCH / "run_all.py"),
            "--quick",
            "--only",
            "bench_renewal,bench_fleet",
            "--out",
            str(out),
        ],
        cwd=ROOT,
        capture_output=True,
        text=True,
        timeout=600,
    )
    assert done.returncode == 0, done.stdout[-2000:] + done.stderr[-2000:]
    doc = json.loads(out.read_text())
    assert set(doc["scripts"]) == {"bench_renewal", "bench_fleet"}
    assert doc["failed"] == {}
    assert "ratio" in done.stdout
