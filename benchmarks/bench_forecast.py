"""Time a whole-site forecast through the HTTP API: 100,000 lamp positions, database included.

The site: 200 areas, 50,000 fixtures with 2 lamps each (3 lamp types), a year of daily
area burn-hour records (73,000 rows) and a monthly voltage reading per area. The timed part
is GET /api/v1/forecasts/sites/{id} through FastAPI's TestClient on a fresh app: every query,
the position ages, fleet evaluation, per-position renewal and crossing dates. Scratch
databases only (bench_forecast, or --pg-url's), never the test database.

Run: python benchmarks/bench_forecast.py [sqlite|postgresql|both] [--sizes 5000,50000] [--quick]
[--pg-url postgresql+psycopg://postgres@127.0.0.1:5432/bench_NAME] (default bench_forecast).
P6: 100,000 positions (target <= 1 s); P8: the same at the other sizes (growth). Beside it,
the ages phase (readings.ages.position_ages of the site: its queries and arithmetic) against
a bare fetch of its main rows in the same run (the positions query, driver tuples into
numpy, as every float matrix was read before); peak memory of one forecast request
(tracemalloc, numpy's arrays included) and the process's peak RSS are printed after.
PostgreSQL tables are ANALYZEd after the load, as autovacuum would do after a bulk insert
(the test server runs with autovacuum off; without statistics the planner takes nested
loops over 50,000 fixtures).
"""

from __future__ import annotations

import os
import sys
import tempfile
import time
from datetime import UTC, datetime, timedelta
from pathlib import Path
from typing import Any

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))
sys.path.insert(0, str(Path(__file__).resolve().parent))

from _table import Table, parser

PG_ADMIN = "postgresql+psycopg://postgres@127.0.0.1:5432/postgres"
PG_URL = "postgresql+psycopg://postgres@127.0.0.1:5432/bench_forecast"
N_AREAS = 200
N_FIXTURES = 50_000
LAMPS = 2
RUNS = 3


def prepare(url: str) -> None:
    """Fresh schema by the migrations (on PostgreSQL the url's database dropped and made anew)."""
    from sqlalchemy import create_engine, text
    from sqlalchemy.engine import make_url

    if url.startswith("postgresql"):
        name = make_url(url).database
        if not name or not name.replace("_", "").isalnum():
            raise SystemExit(f"refusing database name {name!r}: letters, digits and _ only")
        admin = create_engine(PG_ADMIN, isolation_level="AUTOCOMMIT")
        with admin.connect() as c:
            c.execute(text(f'DROP DATABASE IF EXISTS "{name}"'))
            c.execute(text(f'CREATE DATABASE "{name}"'))
        admin.dispose()
    from service.db.session import make_engine
    from tests.conftest import migrate

    eng = make_engine(url)
    migrate(eng)
    eng.dispose()


def load(url: str) -> tuple[int, str]:
    """Insert the site and its readings with Core executemany; returns (site id, API key)."""
    from sqlalchemy import insert
    from sqlalchemy.orm import Session

    from service.catalogue.models import LampType
    from service.db.session import make_engine
    from service.keys import service as keys
    from service.readings.models import BurnHourRecord, VoltageReading
    from service.register.models import Area, Fixture, LampPosition, Site

    eng = make_engine(url)
    t0 = datetime(2025, 1, 1, tzinfo=UTC)
    with Session(eng) as s:
        site = Site(
            name="Benchmark Campus",
            time_zone="Europe/Lisbon",
            nominal_voltage_v=230.0,
            currency="EUR",
            energy_price_per_kwh=0.2,
            labour_rate_per_h=40.0,
        )
        s.add(site)
        types = [
            LampType(
                code="B-INC",
                technology="incandescent",
                rated_watts=100,
                rated_volts=230,
                rated_life_h=1000.0,
            ),
            LampType(
                code="B-T8",
                technology="linear_fluorescent",
                rated_watts=32,
                rated_volts=230,
                rated_life_h=24000.0,
            ),
            LampType(
                code="B-MH",
                technology="metal_halide",
                rated_watts=250,
                rated_volts=230,
                rated_life_h=15000.0,
            ),
        ]
        s.add_all(types)
        s.flush()
        s.execute(
            insert(Area),
            [
                {
                    "site_id": site.id,
                    "name": f"Area {i:03d}",
                    "hours_per_day": 10.0 + i % 10,
                    "days_per_week": 5.0 + i % 3,
                    "starts_per_day": 2.0,
                    "light_floor": 0.8,
                    "burnout_ceiling": 0.15,
                }
                for i in range(N_AREAS)
            ],
        )
        area_ids = [a.id for a in s.query(Area).order_by(Area.id)]
        s.execute(
            insert(Fixture),
            [
                {
                    "site_id": site.id,
                    "area_id": area_ids[i % N_AREAS],
                    "tag": f"F{i:06d}",
                    "lamp_type_id": types[i % 3].id,
                    "lamps_per_fixture": LAMPS,
                    "ballast_kind": "none" if i % 3 == 0 else "electronic",
                }
                for i in range(N_FIXTURES)
            ],
        )
        fixture_ids = [r[0] for r in s.query(Fixture.id).order_by(Fixture.id)]
        s.execute(
            insert(LampPosition),
            [
                {
                    "fixture_id": f,
                    "position_no": n,
                    "lamp_installed_at": t0 + timedelta(days=i % 90),
                    "hours_at_install": 0.0,
                    "starts_at_install": 0.0,
                }
                for i, f in enumerate(fixture_ids)
                for n in range(1, LAMPS + 1)
            ],
        )
        s.execute(
            insert(BurnHourRecord),
            [
                {
                    "site_id": site.id,
                    "area_id": a,
                    "kind": "period",
                    "period_start": t0 + timedelta(days=d),
                    "period_end": t0 + timedelta(days=d + 1),
                    "hours": 11.0,
                    "starts": 2.0,
                    "counter_reset": False,
                }
                for a in area_ids
                for d in range(365)
            ],
        )
        s.execute(
            insert(VoltageReading),
            [
                {
                    "site_id": site.id,
                    "area_id": a,
                    "measured_at": t0 + timedelta(days=30 * m),
                    "volts": 224.0 + (a % 13),
                }
                for a in area_ids
                for m in range(12)
            ],
        )
        _, secret = keys.create_key(s, "bench-reader", "read")
        s.commit()
        site_id = site.id
    eng.dispose()
    return site_id, secret


def run(label: str, url: str, table: Table, fixtures: int, repeats: int, target: str) -> None:
    """Load, then time the site forecast through the API (median of repeats)."""
    global N_FIXTURES
    N_FIXTURES = fixtures
    t = time.perf_counter()
    prepare(url)
    site_id, key = load(url)
    if url.startswith("postgresql"):
        analyze(url)
    print(f"[{label}] load: {time.perf_counter() - t:.1f} s ({N_FIXTURES * LAMPS:,} positions)")
    os.environ["LAMPKEEPER_DATABASE_URL"] = url
    from fastapi.testclient import TestClient
    from sqlalchemy.orm import Session

    from service.config import get_settings
    from service.db.session import get_engine
    from service.main import create_app
    from service.readings.ages import positions_select
    from service.readings.repository import rows_matrix
    from service.register.models import Fixture

    get_settings.cache_clear()
    get_engine.cache_clear()
    client = TestClient(create_app(start_scheduler=False))
    headers = {"Authorization": f"Bearer {key}"}
    at = "2026-01-01T00:00:00+00:00"
    answers: list[Any] = []

    def call() -> None:
        r = client.get(
            f"/api/v1/forecasts/sites/{site_id}",
            params={"horizon_weeks": 13, "at": at},
            headers=headers,
        )
        assert r.status_code == 200, r.text
        answers.append(r)

    positions = N_FIXTURES * LAMPS
    with Session(get_engine()) as s:
        cond = [Fixture.site_id == site_id, Fixture.retired_at.is_(None)]
        dialect = s.connection().dialect.name
        table.timed(
            "P6" if positions == 100_000 else "P8",
            f"site forecast via API, {positions:,} positions, {label}",
            call,
            anchor="bare fetch of the positions rows",
            anchor_fn=lambda: rows_matrix(s, positions_select(cond, dialect), 11),
            repeats=repeats,
            target=target if positions == 100_000 else "linear growth",
        )
    ages_phase(label, table, site_id, repeats)
    phases(label, site_id, repeats)
    peak_memory(label, call)
    body = answers[-1].json()
    s = body["summary"]
    print(
        f"[{label}] positions {s['positions']:,}, expected burnouts (13 weeks) "
        f"{s['expected_burnouts_spot']:.0f}, areas {len(body['areas'])}"
    )
    get_engine().dispose()
    get_engine.cache_clear()


def analyze(url: str) -> None:
    """Planner statistics, as autovacuum gathers them after a bulk load."""
    from sqlalchemy import create_engine, text

    eng = create_engine(url, isolation_level="AUTOCOMMIT")
    with eng.connect() as c:
        c.execute(text("ANALYZE"))
    eng.dispose()


def ages_phase(label: str, table: Table, site_id: int, repeats: int) -> None:
    """position_ages of the site beside a bare fetch of its positions rows (same session)."""
    from sqlalchemy.orm import Session

    from service.db.session import get_engine
    from service.readings.ages import position_ages, positions_select
    from service.readings.repository import rows_matrix
    from service.register.models import Fixture

    at = datetime(2026, 1, 1, tzinfo=UTC)
    with Session(get_engine()) as s:
        dialect = s.connection().dialect.name
        cond = [Fixture.site_id == site_id, Fixture.retired_at.is_(None)]
        table.timed(
            "P6a" if N_FIXTURES * LAMPS == 100_000 else "P8a",
            f"ages phase, {N_FIXTURES * LAMPS:,} positions, {label}",
            lambda: position_ages(s, site_id=site_id, at=at, active_only=True),
            anchor="bare fetch of the positions rows",
            anchor_fn=lambda: rows_matrix(s, positions_select(cond, dialect), 11),
            repeats=repeats,
        )


def phases(label: str, site_id: int, repeats: int) -> None:
    """The forecast's phases one by one in one session (medians): where the time goes."""
    import statistics

    from sqlalchemy.orm import Session

    from service.db.session import get_engine

    times: dict[str, list[float]] = {}
    with Session(get_engine()) as s:
        for _ in range(max(1, repeats)):
            _phase_pass(s, site_id, times)
    split = ", ".join(f"{k} {statistics.median(v) * 1e3:.0f} ms" for k, v in times.items())
    print(f"[{label}] phases (medians of {max(1, repeats)}): {split}")


def _phase_pass(s: Any, site_id: int, times: dict[str, list[float]]) -> None:
    """One forecast's phases: ages, types and evaluation, ranges, crossings, JSON encoding."""
    import numpy as np

    from service.forecasting import router
    from service.forecasting import service as fc
    from service.forecasting.crossings import crossings, positions_by_row
    from service.forecasting.dirt import position_dirt
    from service.forecasting.fit import load_fitted_types
    from service.readings.ages import position_ages

    at = datetime(2026, 1, 1, tzinfo=UTC)

    def timed(name: str, fn: Any) -> Any:
        t0 = time.perf_counter()
        out = fn()
        times.setdefault(name, []).append(time.perf_counter() - t0)
        return out

    ages = timed("ages", lambda: position_ages(s, site_id=site_id, at=at, active_only=True))

    def evaluate() -> Any:
        types = load_fitted_types(
            s, ages.lamp_type_id, field_fit=True, ballast_kinds=ages.ballast_kind
        )
        return types, fc.evaluate_positions(ages, types, 13.0, position_dirt(s, ages, at))

    types, pf = timed("evaluate", evaluate)
    _, inverse = np.unique(ages.area_id, return_inverse=True)
    group = np.asarray(inverse, dtype=np.int64).ravel()
    members = positions_by_row(group)
    sels = [*(fc._live(pf, m[1]) for m in members), fc._live(pf)]
    timed("ranges", lambda: pf.spread.counts(sels))
    n_g = len(members)
    rate = np.bincount(group, weights=ages.burn_h_per_week) / np.bincount(group)
    limits = (np.full(n_g, 0.8), np.full(n_g, 0.15))  # the bench areas' floor and ceiling
    timed("crossings", lambda: crossings(pf, types, group, *limits, rate))
    f = fc.forecast(s, site_id=site_id, horizon_weeks=13.0, at=at)
    timed("encode", lambda: router._read(f, "site", site_id, False).model_dump_json())


def peak_memory(label: str, call: Any) -> None:
    """Peak traced memory of one forecast request, and the process's peak RSS so far."""
    import resource
    import tracemalloc

    tracemalloc.start()
    call()
    _, peak = tracemalloc.get_traced_memory()
    tracemalloc.stop()
    rss_mb = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024
    print(
        f"[{label}] peak memory of one request: {peak / 2**20:.0f} MB traced, process peak RSS {rss_mb:.0f} MB"
    )


def main() -> int:
    """Print and write the rows (P6 at 100,000 positions; P8 growth at smaller sizes)."""
    ap = parser(__doc__, default_repeats=RUNS)
    ap.add_argument("db", nargs="?", default="both", choices=["sqlite", "postgresql", "both"])
    ap.add_argument("--sizes", default="5000,50000", help="fixtures per run (2 lamps each)")
    ap.add_argument(
        "--pg-url", default=PG_URL, help="scratch PostgreSQL database (dropped and recreated)"
    )
    args = ap.parse_args()
    sizes = [200] if args.quick else [int(x) for x in args.sizes.split(",")]
    repeats = 1 if args.quick else args.repeats
    which = "sqlite" if args.quick and args.db == "both" else args.db
    table = Table("bench_forecast", args.quick)
    for n in sizes:
        if which in ("sqlite", "both"):
            with tempfile.TemporaryDirectory() as tmp:
                url = f"sqlite:///{tmp}/bench_forecast.sqlite3"
                run("sqlite", url, table, n, repeats, "<= 1 s")
        if which in ("postgresql", "both"):
            run("postgresql", args.pg_url, table, n, repeats, "<= 1 s")
    table.finish(args.json)
    return 0


if __name__ == "__main__":
    sys.exit(main())
