"""The change feed's cost and speed on PostgreSQL, for a portfolio of 100,000 fixtures.

Loads the weekly-run benchmark's invented portfolio (bench_weekly_run.py) once into a
template database, then per repeat clones it and times:

- the weekly run of every site with the change triggers, and the same run in a clone with
  the triggers dropped (the anchor): the feed's share of the run's time;
- an UPDATE of all 100,000 fixtures with and without triggers: change rows written per
  second (rows over the extra time the triggers take), beside plain row updates per second;
- reading the whole feed in pages of 1,000 (the feed's own query, below the horizon),
  beside the same keyset paging over the fixtures table (the anchor).

Medians of the repeats; the order of with/without alternates between repeats.
Run: python benchmarks/bench_changes.py [URL of a scratch database] [repeats] [--reads-only]
"""

from __future__ import annotations

import statistics
import sys
import time
from pathlib import Path

import numpy as np
from sqlalchemy import func, select, text
from sqlalchemy.engine import make_url
from sqlalchemy.orm import Session, sessionmaker

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))
sys.path.insert(0, str(ROOT / "benchmarks"))

import bench_weekly_run as weekly  # noqa: E402

from service.changes import repository  # noqa: E402
from service.changes.models import Change  # noqa: E402
from service.db.session import make_engine  # noqa: E402

URL = (
    sys.argv[1]
    if len(sys.argv) > 1
    else "postgresql+psycopg://postgres@127.0.0.1:5432/bench_changes"
)
REPEATS = int(sys.argv[2]) if len(sys.argv) > 2 else 3
TRACKED = (
    "sites",
    "areas",
    "fixtures",
    "lamp_positions",
    "lamp_types",
    "burnout_reports",
    "work_orders",
    "work_order_lines",
    "weekly_runs",
)


def admin_exec(sql: str) -> None:
    """Run one statement on the server's postgres database (autocommit)."""
    u = make_url(URL)
    eng = make_engine(u.set(database="postgres").render_as_string(hide_password=False))
    with eng.connect().execution_options(isolation_level="AUTOCOMMIT") as c:
        c.execute(text(sql))
    eng.dispose()


def clone(name: str) -> str:
    """A fresh copy of the loaded template database; its URL."""
    template = make_url(URL).database
    admin_exec(f'DROP DATABASE IF EXISTS "{name}" WITH (FORCE)')
    admin_exec(f'CREATE DATABASE "{name}" TEMPLATE "{template}"')
    return make_url(URL).set(database=name).render_as_string(hide_password=False)


def drop_triggers(url: str) -> None:
    """Remove every change trigger (the anchor's database)."""
    eng = make_engine(url)
    with eng.begin() as c:
        for table in TRACKED:
            for op in ("insert", "update", "delete"):
                c.execute(text(f"DROP TRIGGER IF EXISTS lk_changes_{table}_{op} ON {table}"))
    eng.dispose()


def count_changes(url: str) -> int:
    """Rows in the changes table."""
    eng = make_engine(url)
    with eng.connect() as c:
        n = int(c.scalar(select(func.count()).select_from(Change)) or 0)
    eng.dispose()
    return n


def time_update(url: str) -> float:
    """Seconds for one UPDATE touching every fixture."""
    eng = make_engine(url)
    with eng.begin() as c:
        t0 = time.perf_counter()
        c.execute(text("UPDATE fixtures SET location = location || '.'"))
        dt = time.perf_counter() - t0
    eng.dispose()
    return dt


READ_ROWS = 100_000  # changes read per timing (the anchor reads as many fixture rows)


def time_feed_read(url: str, page: int = 1000) -> tuple[float, int, float, int]:
    """(seconds, rows) reading READ_ROWS of the feed, then as many fixtures by keyset (anchor)."""
    eng = make_engine(url)
    factory = sessionmaker(bind=eng, expire_on_commit=False)
    with factory() as s:
        t0 = time.perf_counter()
        n, after = 0, None
        while True:
            rows = repository.read_after(s, after, page)
            if not rows or n >= READ_ROWS:
                break
            n += len(rows)
            after = (rows[-1].xact_id, rows[-1].id)
        dt = time.perf_counter() - t0
        t1 = time.perf_counter()
        m, last = 0, 0
        while True:
            ids = keyset_fixtures(s, last, page)
            if not ids or m >= READ_ROWS:
                break
            m += len(ids)
            last = ids[-1][0]
        dt_anchor = time.perf_counter() - t1
    eng.dispose()
    return dt, n, dt_anchor, m


def keyset_fixtures(s: Session, last: int, page: int) -> list[tuple[int, ...]]:
    """One keyset page of whole fixture rows."""
    q = text("SELECT * FROM fixtures WHERE id > :last ORDER BY id LIMIT :page")
    return [tuple(r) for r in s.execute(q, {"last": last, "page": page})]


def print_reads(url: str) -> None:
    """The feed-read figures on a database that already holds changes."""
    reads = [time_feed_read(url) for _ in range(REPEATS)]
    dt_r = statistics.median(r[0] for r in reads)
    dt_a = statistics.median(r[2] for r in reads)
    print(f"feed read in pages of 1,000, median of {REPEATS}:")
    print(f"  {reads[0][1]:,} changes in {dt_r:.2f} s: {reads[0][1] / dt_r:,.0f} changes/s")
    print(f"  anchor, keyset pages of whole fixture rows: {reads[0][3] / dt_a:,.0f} rows/s")


def main() -> None:
    """Load once, then repeat: runs and updates with and without triggers; print medians."""
    rng = np.random.default_rng(20261201)
    t0 = time.perf_counter()
    weekly.rebuild(URL)
    sites = weekly.load(URL, rng)
    print(
        f"load (template): {time.perf_counter() - t0:.1f} s, {count_changes(URL):,} changes written"
    )
    base = make_url(URL).database
    runs: dict[bool, list[float]] = {True: [], False: []}
    updates: dict[bool, list[float]] = {True: [], False: []}
    run_changes = 0
    for rep in range(REPEATS):
        order = (True, False) if rep % 2 == 0 else (False, True)
        for with_triggers in order:
            url = clone(f"{base}_r{rep}_{'t' if with_triggers else 'n'}")
            if not with_triggers:
                drop_triggers(url)
            before = count_changes(url)
            dt, done = weekly.run_all(url, sites)
            assert all(r.outcome == "succeeded" for r in done), [r.error for r in done]
            runs[with_triggers].append(dt)
            if with_triggers:
                run_changes = count_changes(url) - before
            updates[with_triggers].append(time_update(url))
            if not (with_triggers and rep == REPEATS - 1):
                admin_exec(f'DROP DATABASE IF EXISTS "{make_url(url).database}" WITH (FORCE)')
            else:
                last_url = url
    med = {k: statistics.median(v) for k, v in runs.items()}
    upd = {k: statistics.median(v) for k, v in updates.items()}
    n_fix = weekly.N_SITES * weekly.AREAS_PER_SITE * weekly.FIXTURES_PER_AREA
    print(f"weekly run, {len(sites)} sites, median of {REPEATS}:")
    print(f"  with change triggers:      {med[True]:.2f} s ({run_changes:,} changes written)")
    print(f"  anchor, triggers dropped:  {med[False]:.2f} s")
    print(f"  feed's share: {100 * (med[True] / med[False] - 1):+.1f}% (target at most +20%)")
    extra = upd[True] - upd[False]
    print(f"UPDATE of {n_fix:,} fixtures, median of {REPEATS}:")
    print(f"  with triggers {upd[True]:.2f} s, anchor without {upd[False]:.2f} s")
    print(f"  plain row updates/s (anchor): {n_fix / upd[False]:,.0f}")
    print(f"  change rows written/s (rows / extra time): {n_fix / max(extra, 1e-9):,.0f}")
    print_reads(last_url)
    admin_exec(f'DROP DATABASE IF EXISTS "{make_url(last_url).database}" WITH (FORCE)')


if __name__ == "__main__":
    if len(sys.argv) > 3 and sys.argv[3] == "--reads-only":
        print_reads(URL)  # on a database already holding changes (e.g. a kept clone)
    else:
        main()
