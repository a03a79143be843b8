"""Time the weekly run for a portfolio of 100,000 fixtures and 300,000 lamp positions.

Builds a scratch PostgreSQL database (default: bench_weekly on the local server), creates
the schema with the migrations, bulk-loads invented data with Core inserts, then runs every
site's weekly issue once (orders created) and once more (the repeat creates nothing).

Run: python benchmarks/bench_weekly_run.py [URL] [--sizes 10,100] [--quick] [--repeats N]
(--profile FILE: cProfile the first run of each size into FILE.<size>, top 25 printed;
--phases: seconds in each phase of the issue path per run, printed: planning with position
ages, the fixture and position reads, the bulk writes, taking the reports; --reuse: keep a
database already holding the portfolio of that size instead of rebuilding it).
P5: 100,000 fixtures (target <= 5 s), anchor column: the repeat run that creates nothing;
P8: the same at 10,000 fixtures (growth).
"""

from __future__ import annotations

import statistics
import sys
import time
from datetime import UTC, datetime, timedelta
from pathlib import Path
from typing import Any

import numpy as np
from sqlalchemy import insert, text
from sqlalchemy.engine import make_url
from sqlalchemy.orm import sessionmaker

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))
sys.path.insert(0, str(Path(__file__).resolve().parent))

from _table import Row, Table, parser
from alembic import command

from service.api.health import alembic_config
from service.catalogue.models import LampType
from service.db.session import make_engine
from service.events.models import BurnoutReport
from service.register.models import Area, Fixture, LampPosition, Site
from service.scheduling.runner import run_site_week

URL = "postgresql+psycopg://postgres@127.0.0.1:5432/bench_weekly"
N_SITES = 10
AREAS_PER_SITE = 100
FIXTURES_PER_AREA = 100  # 10 x 100 x 100 = 100,000 fixtures
LAMPS_PER_FIXTURE = 3  # 300,000 positions
OPEN_REPORTS = 3_000
WEEK = "2026-W49"
NOW = datetime.now(UTC)

TYPES = [  # invented catalogue entries
    ("BENCH-T8", "linear_fluorescent", 32, 24_000, 4.0, True, False),
    ("BENCH-MH", "metal_halide", 250, 15_000, 28.0, True, True),
    ("BENCH-HPS", "high_pressure_sodium", 150, 24_000, 22.0, True, False),
    ("BENCH-CFL", "compact_fluorescent", 18, 10_000, 5.0, True, False),
    ("BENCH-LED", "led", 20, 50_000, 15.0, False, False),
    ("BENCH-HAL", "halogen", 50, 3_000, 3.0, False, False),
]


def rebuild(url: str) -> None:
    """Drop and create the scratch database, then migrate it."""
    u = make_url(url)
    admin = make_engine(u.set(database="postgres").render_as_string(hide_password=False))
    with admin.connect().execution_options(isolation_level="AUTOCOMMIT") as c:
        c.execute(text(f'DROP DATABASE IF EXISTS "{u.database}" WITH (FORCE)'))
        c.execute(text(f'CREATE DATABASE "{u.database}"'))
    admin.dispose()
    engine = make_engine(url)
    cfg = alembic_config()
    cfg.attributes["configure_logger"] = False
    with engine.begin() as conn:
        cfg.attributes["connection"] = conn
        command.upgrade(cfg, "head")
    engine.dispose()


def load(url: str, rng: np.random.Generator) -> list[int]:
    """Bulk-insert sites, lamp types, areas, fixtures, positions and open burnout reports."""
    engine = make_engine(url)
    with engine.begin() as c:
        c.execute(
            insert(LampType),
            [
                {
                    "id": i + 1,
                    "code": code,
                    "technology": tech,
                    "rated_watts": float(w),
                    "rated_volts": 230.0,
                    "rated_life_h": float(life),
                    "rated_percentile": 50.0,
                    "unit_price": price,
                    "contains_mercury": hg,
                    "rupture_risk": rupture,
                    "lumen_basis": "hours",
                }
                for i, (code, tech, w, life, price, hg, rupture) in enumerate(TYPES)
            ],
        )
        c.execute(
            insert(Site),
            [
                {
                    "id": s + 1,
                    "name": f"Bench Campus {s + 1}",
                    "time_zone": ["Europe/Lisbon", "America/Chicago", "Asia/Tokyo"][s % 3],
                    "nominal_voltage_v": 230.0,
                    "currency": "EUR",
                    "energy_price_per_kwh": 0.2,
                    "labour_rate_per_h": 45.0,
                    "disposal_fee_per_mercury_lamp": 0.6,
                    "weekly_run_weekday": 0,
                    "weekly_run_time": "06:00",
                    "lookahead_weeks": 4,
                    "created_at": NOW,
                    "updated_at": NOW,
                }
                for s in range(N_SITES)
            ],
        )
        areas, fixtures, positions = [], [], []
        aid = fid = pid = 0
        for s in range(N_SITES):
            for _ in range(AREAS_PER_SITE):
                aid += 1
                weekly = float(rng.choice([40.0, 60.0, 84.0, 168.0]))
                areas.append(
                    {
                        "id": aid,
                        "site_id": s + 1,
                        "name": f"Area {aid}",
                        "access_method": str(rng.choice(["ladder", "lift", "scaffold", "floor"])),
                        "group_minutes_per_lamp": 5.0,
                        "spot_minutes_per_lamp": 30.0,
                        "equipment_hire_per_visit": float(rng.choice([0.0, 150.0])),
                        "weekly_burn_hours": weekly,
                        "starts_per_day": 1.0,
                        "light_floor": 0.8 if aid % 4 == 0 else None,
                        "burnout_ceiling": 0.15 if aid % 5 == 0 else None,
                        "created_at": NOW,
                        "updated_at": NOW,
                    }
                )
                main_type = int(rng.integers(1, len(TYPES) + 1))
                life = TYPES[main_type - 1][3]
                # Lamps went in at one group relamp, some areas long ago.
                age_h = float(rng.uniform(0.1, 1.0) * life)
                installed = NOW - timedelta(weeks=age_h / weekly)
                for k in range(FIXTURES_PER_AREA):
                    fid += 1
                    lt = main_type if k % 10 else int(rng.integers(1, len(TYPES) + 1))
                    fixtures.append(
                        {
                            "id": fid,
                            "site_id": s + 1,
                            "area_id": aid,
                            "tag": f"F{fid:06d}",
                            "location": f"Row {k // 10}",
                            "lamp_type_id": lt,
                            "lamps_per_fixture": LAMPS_PER_FIXTURE,
                            "ballast_kind": "electronic",
                            "measured_voltage_v": float(np.round(rng.uniform(222, 238), 1)),
                            "created_at": NOW,
                            "updated_at": NOW,
                        }
                    )
                    for n in range(LAMPS_PER_FIXTURE):
                        pid += 1
                        positions.append(
                            {
                                "id": pid,
                                "fixture_id": fid,
                                "position_no": n + 1,
                                "lamp_installed_at": installed,
                                "hours_at_install": 0.0,
                                "starts_at_install": 0.0,
                            }
                        )
        c.execute(insert(Area), areas)
        c.execute(insert(Fixture), fixtures)
        c.execute(insert(LampPosition), positions)
        dark = rng.choice(pid, size=OPEN_REPORTS, replace=False) + 1
        fix_of = {p["id"]: p["fixture_id"] for p in positions}
        fx = {f["id"]: f for f in fixtures}
        reports = []
        for i, p in enumerate(sorted(int(x) for x in dark)):
            f = fx[fix_of[p]]
            reports.append(
                {
                    "id": i + 1,
                    "site_id": f["site_id"],
                    "area_id": f["area_id"],
                    "fixture_id": f["id"],
                    "position_id": p,
                    "reported_at": NOW - timedelta(hours=5),
                    "status": "open",
                    "created_at": NOW,
                    "updated_at": NOW,
                }
            )
        c.execute(insert(BurnoutReport), reports)
        for table in (
            "lamp_types",
            "sites",
            "areas",
            "fixtures",
            "lamp_positions",
            "burnout_reports",
        ):
            c.execute(
                text(
                    f"SELECT setval(pg_get_serial_sequence('{table}', 'id'), (SELECT max(id) FROM {table}))"
                )
            )
    # Table statistics, as autovacuum would gather them on a live database: without them the
    # planner guesses a few rows per table and sorts and joins the 300,000 positions badly.
    with engine.connect().execution_options(isolation_level="AUTOCOMMIT") as c:
        c.execute(text("ANALYZE"))
    engine.dispose()
    return list(range(1, N_SITES + 1))


def run_all(url: str, sites: list[int]) -> tuple[float, list[Any]]:
    """Every site's weekly run; (seconds, run records)."""
    engine = make_engine(url)
    factory = sessionmaker(bind=engine, expire_on_commit=False)
    t0 = time.perf_counter()
    runs = [run_site_week(factory, s, week=WEEK, trigger="cli") for s in sites]
    dt = time.perf_counter() - t0
    engine.dispose()
    return dt, runs


def main() -> int:
    """Build, load, run twice (median of repeats of the first run on a cleared week)."""
    global FIXTURES_PER_AREA, OPEN_REPORTS
    ap = parser(__doc__, default_repeats=3)
    ap.add_argument("url", nargs="?", default=URL, help="scratch PostgreSQL database")
    ap.add_argument("--sizes", default="10,100", help="fixtures per area (100 areas x 10 sites)")
    ap.add_argument("--profile", help="cProfile the first run into this file (prints the top)")
    ap.add_argument("--phases", action="store_true", help="print seconds per phase per run")
    ap.add_argument("--reuse", action="store_true", help="keep a database already loaded")
    args = ap.parse_args()
    phases = time_phases() if args.phases else None
    quick = args.quick
    sizes = [1] if quick else [int(x) for x in args.sizes.split(",")]
    repeats = 1 if quick else args.repeats
    table = Table("bench_weekly_run", quick)
    for per_area in sizes:
        FIXTURES_PER_AREA = per_area
        n_fix = N_SITES * AREAS_PER_SITE * per_area
        OPEN_REPORTS = min(3_000, n_fix * LAMPS_PER_FIXTURE // 100)
        rng = np.random.default_rng(20261201)
        t0 = time.perf_counter()
        if args.reuse and loaded(args.url) == n_fix:
            sites = list(range(1, N_SITES + 1))
        else:
            rebuild(args.url)
            sites = load(args.url, rng)
        print(
            f"load: {time.perf_counter() - t0:.1f} s ({n_fix:,} fixtures, "
            f"{n_fix * LAMPS_PER_FIXTURE:,} positions)"
        )
        firsts: list[float] = []
        runs: list[Any] = []
        for i in range(repeats):
            clear(args.url)
            if args.profile and i == 0:
                dt, runs = profiled(args.url, sites, f"{args.profile}.{per_area}")
            else:
                dt, runs = run_all(args.url, sites)
            bad = [r for r in runs if r.outcome != "succeeded"]
            assert not bad, bad[0].error
            firsts.append(dt)
            if phases is not None:
                print(f"  run {i + 1}: {dt:.2f} s; " + ", ".join(
                    f"{k} {v:.2f}" for k, v in phases.items()
                ))  # fmt: skip
                phases.clear()
        print(
            f"  orders created {sum(r.orders_created for r in runs)} "
            f"(group {sum(r.group_orders for r in runs)}, spot {sum(r.spot_orders for r in runs)})"
        )
        dt2, runs2 = run_all(args.url, sites)
        assert sum(r.orders_created for r in runs2) == 0, "the repeat run created orders"
        table.add(
            Row(
                "P5" if n_fix == 100_000 else "P8",
                f"weekly run, {n_fix:,} fixtures, {n_fix * LAMPS_PER_FIXTURE:,} positions",
                statistics.median(firsts),
                "repeat run (creates nothing)",
                dt2,
                repeats,
                "<= 5 s" if n_fix == 100_000 else "linear growth",
            )
        )
    table.finish(args.json)
    return 0


PHASES = (  # functions of service.workorders.issue, or "module:function" elsewhere
    "_due_types",
    "load_positions",
    "plan_areas",
    "_load_work",
    "_fixtures",
    "_positions",
    "_group_lines",
    "_write",
    "write_rows",
    "service.events.reports:take_for_orders",
)


def time_phases() -> dict[str, float]:
    """Wrap the issue path's phases with timers; the dict fills with seconds per phase."""
    import importlib

    spent: dict[str, float] = {}

    def wrap(entry: str) -> None:
        where, _, name = entry.rpartition(":")
        module = importlib.import_module(where or "service.workorders.issue")
        inner = getattr(module, name)

        def timed(*a: Any, **k: Any) -> Any:
            t0 = time.perf_counter()
            try:
                return inner(*a, **k)
            finally:
                spent[name] = spent.get(name, 0.0) + time.perf_counter() - t0

        setattr(module, name, timed)

    for entry in PHASES:
        wrap(entry)
    return spent


def profiled(url: str, sites: list[int], out: str) -> tuple[float, list[Any]]:
    """run_all under cProfile: the stats go to `out`, the top 25 by cumulative time printed."""
    import cProfile
    import pstats

    prof = cProfile.Profile()
    result = prof.runcall(run_all, url, sites)
    prof.dump_stats(out)
    pstats.Stats(out).sort_stats("cumulative").print_stats(25)
    return result


def loaded(url: str) -> int:
    """Fixtures in the scratch database (0 when it or its schema is missing)."""
    from sqlalchemy.exc import DBAPIError

    engine = make_engine(url)
    try:
        with engine.connect() as c:
            return int(c.execute(text("SELECT count(*) FROM fixtures")).scalar_one())
    except DBAPIError:
        return 0
    finally:
        engine.dispose()


def clear(url: str) -> None:
    """Remove the orders and run records of a previous run (the scratch data stays)."""
    engine = make_engine(url)
    with engine.begin() as c:
        c.execute(text("UPDATE burnout_reports SET status = 'open', work_order_id = NULL"))
        c.execute(text("TRUNCATE work_order_lines, work_orders, weekly_runs, run_weeks CASCADE"))
    engine.dispose()


if __name__ == "__main__":
    sys.exit(main())
