"""The change feed's cost and speed on PostgreSQL, for a portfolio of 100,000 fixtures.

Loads the weekly-run benchmark's invented portfolio (bench_weekly_run.py) once into a
template database, then per repeat clones it and times:

- the weekly run of every site with the change triggers, and the same run in a clone with
  the triggers dropped (the anchor): the feed's share of the run's time;
- an UPDATE of all 100,000 fixtures with and without triggers: change rows written per
  second (rows over the extra time the triggers take), beside plain row updates per second;
- reading the whole feed in pages of 1,000 (the feed's own query, below the horizon),
  beside the same keyset paging over the fixtures table (the anchor).

Medians of the repeats; the order of with/without alternates between repeats. Rows:
C1 the run with triggers beside the run without (target: at most 1.2x), C2 the UPDATE with
beside without (change rows written per second in the note), C3 the feed read beside the
keyset read of as many fixture rows (changes read per second in the note).
Run: python benchmarks/bench_changes.py [URL of a scratch database] [--repeats N] [--quick]
[--reads-only] [--json PATH]; --quick: 2 sites x 10 areas x 10 fixtures, one repeat.
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
from _table import Row, Table, parser  # noqa: E402

from service.changes import repository  # noqa: E402
from service.changes.models import Change  # noqa: E402
from service.db.session import make_engine  # noqa: E402

URL = "postgresql+psycopg://postgres@127.0.0.1:5432/bench_changes"  # set by main()
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
PAGE = 1000  # rows per page of both reads


def time_feed_read(url: str) -> tuple[float, int, float, int]:
    """(seconds, rows) reading READ_ROWS of the feed, then as many fixtures by keyset (anchor)."""
    page = PAGE
    eng = make_engine(url)
    factory = sessionmaker(bind=eng, expire_on_commit=False)
    with factory() as s:
        t0 = time.perf_counter()
        n, after = 0, None
        while True:
            if n >= READ_ROWS:
                break
            rows = repository.read_after(s, after, min(page, READ_ROWS - n))
            if not rows:
                break
            n += len(rows)
            after = (rows[-1].xact_id, rows[-1].id)
        dt = time.perf_counter() - t0
        t1 = time.perf_counter()
        m, last = 0, 0
        while True:
            if m >= READ_ROWS:
                break
            ids = keyset_fixtures(s, last, min(page, READ_ROWS - m))
            if not ids:
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


def add_reads(table: Table, url: str, repeats: int) -> None:
    """C3: the feed read beside the keyset read, on a database that already holds changes."""
    reads = [time_feed_read(url) for _ in range(repeats)]
    dt_r = statistics.median(r[0] for r in reads)
    dt_a = statistics.median(r[2] for r in reads)
    n, m = reads[0][1], reads[0][3]
    table.add(
        Row(
            "C3",
            f"feed read, {n:,} changes in pages of {PAGE:,}",
            dt_r,
            f"keyset pages of {m:,} whole fixture rows",
            dt_a,
            repeats,
            "",
            f"{n / dt_r:,.0f} changes/s read; anchor {m / dt_a:,.0f} rows/s",
        )
    )


def set_size(quick: bool) -> int:
    """Portfolio size of the weekly benchmark's loader (small in quick mode); fixtures."""
    global PAGE
    if quick:
        weekly.N_SITES, weekly.AREAS_PER_SITE, weekly.FIXTURES_PER_AREA = 2, 10, 10
        PAGE = 50  # still several pages
    n_fix = weekly.N_SITES * weekly.AREAS_PER_SITE * weekly.FIXTURES_PER_AREA
    weekly.OPEN_REPORTS = min(3_000, n_fix * weekly.LAMPS_PER_FIXTURE // 100)
    return n_fix


def main() -> int:
    """Load once, then repeat: runs and updates with and without triggers; table rows."""
    global URL, READ_ROWS
    ap = parser(__doc__, default_repeats=3)
    ap.add_argument("url", nargs="?", default=URL, help="scratch PostgreSQL database")
    ap.add_argument("--reads-only", action="store_true", help="C3 on a database with changes")
    args = ap.parse_args()
    URL = args.url
    repeats = 1 if args.quick else args.repeats
    table = Table("bench_changes", args.quick)
    n_fix = set_size(args.quick)
    READ_ROWS = min(READ_ROWS, n_fix)  # the anchor has n_fix fixture rows to read
    if args.reads_only:  # e.g. a kept clone
        add_reads(table, URL, repeats)
        table.finish(args.json)
        return 0
    rng = np.random.default_rng(20261201)
    t0 = time.perf_counter()
    weekly.rebuild(URL)
    sites = weekly.load(URL, rng)
    print(f"load (template): {time.perf_counter() - t0:.1f} s, {count_changes(URL):,} changes")
    runs, updates, run_changes, last_url = measure(sites, repeats)
    med = {k: statistics.median(v) for k, v in runs.items()}
    upd = {k: statistics.median(v) for k, v in updates.items()}
    table.add(
        Row(
            "C1",
            f"weekly run, {n_fix:,} fixtures, change triggers on",
            med[True],
            "the same run, triggers dropped",
            med[False],
            repeats,
            "<= 1.2x",
            f"{run_changes:,} changes written by the run, {run_changes / med[True]:,.0f}/s",
        )
    )
    extra = max(upd[True] - upd[False], 1e-9)
    table.add(
        Row(
            "C2",
            f"UPDATE of {n_fix:,} fixtures, change triggers on",
            upd[True],
            "the same UPDATE, triggers dropped",
            upd[False],
            repeats,
            "",
            f"{n_fix / extra:,.0f} change rows written/s; {n_fix / upd[False]:,.0f} plain updates/s",
        )
    )
    add_reads(table, last_url, repeats)
    admin_exec(f'DROP DATABASE IF EXISTS "{make_url(last_url).database}" WITH (FORCE)')
    table.finish(args.json)
    return 0


def measure(
    sites: list[int], repeats: int
) -> tuple[dict[bool, list[float]], dict[bool, list[float]], int, str]:
    """Run and UPDATE times with and without triggers per repeat, changes of a run, a kept clone."""
    base = make_url(URL).database
    runs: dict[bool, list[float]] = {True: [], False: []}
    updates: dict[bool, list[float]] = {True: [], False: []}
    run_changes, last_url = 0, ""
    for rep in range(repeats):
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
            if with_triggers and rep == repeats - 1:
                last_url = url  # kept for the reads
            else:
                admin_exec(f'DROP DATABASE IF EXISTS "{make_url(url).database}" WITH (FORCE)')
    return runs, updates, run_changes, last_url


if __name__ == "__main__":
    sys.exit(main())
