"""Fixture import speed: 100,000 fixtures (1-4 lamps each) from CSV into SQLite and PostgreSQL.

Run: .venv/bin/python benchmarks/bench_import.py [--rows 100000] [--pg URL] [--scratch NAME]
[--no-pg] [--quick] [--repeats N]
P4: POST /api/v1/fixtures/import (test client) against a raw COPY (PostgreSQL) or
executemany (SQLite) of the very rows the import stored, into the same tables, interleaved.
Each database is fresh and migrated first. The timed part is the service call the API uses
(read_upload + import_fixtures + commit); --http also times the same upload through the
HTTP endpoint with a test client. Target: at most 20 s per database on 2 cores.
PostgreSQL: a scratch database (--scratch, default `bench_import`) is created and dropped on
the server in --pg.
"""

from __future__ import annotations

import io
import random
import statistics
import sys
import tempfile
import time
from datetime import UTC, datetime, timedelta
from pathlib import Path

from sqlalchemy import create_engine, func, select, text
from sqlalchemy.engine import make_url
from sqlalchemy.orm import Session

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))
sys.path.insert(0, str(ROOT / "benchmarks"))

import _rawcopy  # noqa: E402
from _table import Row, Table, parser  # noqa: E402

from service.catalogue.models import LampType  # noqa: E402
from service.db.session import make_engine  # noqa: E402
from service.register.fixture_bulk import (  # noqa: E402
    FIXTURE_COLUMNS,
    FIXTURE_UPLOAD,
    import_fixtures,
)
from service.register.models import Area, LampPosition, Site  # noqa: E402
from service.uploads.parse import RawBody, read_upload  # noqa: E402

SITE = "Bench Campus"
AREAS = ["North Hall", "South Hall", "Car Park", "Plant Room", "Offices"]
TYPES = [  # code, technology, watts, volts, rated life hours
    ("BX-T8-36", "linear_fluorescent", 36.0, 230.0, 20_000.0),
    ("BX-LED-18", "led", 18.0, 230.0, 50_000.0),
    ("BX-MH-150", "metal_halide", 150.0, 230.0, 15_000.0),
    ("BX-HAL-50", "halogen", 50.0, 230.0, 2_000.0),
]


def make_csv(n: int, seed: int = 7) -> tuple[bytes, int]:
    """CSV text for n fixtures of one site; returns (bytes, number of lamp positions)."""
    rng = random.Random(seed)
    out = io.StringIO()
    out.write(",".join(FIXTURE_COLUMNS) + "\n")
    start = datetime(2023, 1, 1, tzinfo=UTC)
    lamps_total = 0
    for i in range(n):
        code = TYPES[i % len(TYPES)][0]
        lamps = rng.randint(1, 4)
        lamps_total += lamps
        at = (start + timedelta(hours=rng.randint(0, 20_000))).isoformat()
        volts = f"{rng.uniform(215, 245):.1f}" if i % 3 else ""
        out.write(
            f"{SITE},{AREAS[i % len(AREAS)]},FX-{i:06d},Bay {i % 400},{code},{lamps},,"
            f"{volts},2023-01-01,{at},{rng.randint(0, 3000)},0\n"
        )
    return out.getvalue().encode(), lamps_total


def migrate(url: str) -> None:
    """Run the Alembic migrations on a database."""
    from alembic import command

    from service.api.health import alembic_config

    engine = make_engine(url)
    cfg = alembic_config()
    cfg.attributes["configure_logger"] = False
    with engine.begin() as conn:
        cfg.attributes["connection"] = conn
        command.upgrade(cfg, "head")
    engine.dispose()


def seed(url: str) -> None:
    """One site, a few areas and lamp types."""
    engine = make_engine(url)
    with Session(engine) as s:
        site = Site(
            name=SITE,
            time_zone="UTC",
            nominal_voltage_v=230.0,
            currency="EUR",
            energy_price_per_kwh=0.2,
            labour_rate_per_h=40.0,
        )
        s.add(site)
        s.flush()
        s.add_all(Area(site_id=site.id, name=a) for a in AREAS)
        s.add_all(
            LampType(
                code=c,
                technology=t,
                rated_watts=w,
                rated_volts=v,
                rated_life_h=life,
                rated_percentile=50.0,
                lumen_basis="hours",
                unit_price=3.0,
                contains_mercury=t in ("linear_fluorescent", "metal_halide"),
                rupture_risk=t == "metal_halide",
            )
            for c, t, w, v, life in TYPES
        )
        s.commit()
    engine.dispose()


def run_service(url: str, data: bytes) -> tuple[float, int, int]:
    """Time parse + import + commit through the service function; returns (s, fixtures, lamps)."""
    engine = make_engine(url)
    with Session(engine) as s:
        t0 = time.perf_counter()
        rows = read_upload(RawBody(data, "text/csv"), FIXTURE_UPLOAD)
        t1 = time.perf_counter()
        result = import_fixtures(s, rows)
        t2 = time.perf_counter()
        s.commit()
        t3 = time.perf_counter()
        dt = t3 - t0
        print(
            f"  phases: parse {t1 - t0:.2f} s, check+insert {t2 - t1:.2f} s, commit {t3 - t2:.2f} s"
        )
        lamps = s.scalar(select(func.count()).select_from(LampPosition)) or 0
    engine.dispose()
    return dt, result.created, int(lamps)


def run_http(url: str, data: bytes) -> float:
    """Time the same upload through POST /api/v1/fixtures/import."""
    import os

    os.environ["LAMPKEEPER_DATABASE_URL"] = url
    from fastapi.testclient import TestClient

    from service.config import get_settings
    from service.db.session import get_engine
    from service.keys import service as keys
    from service.main import create_app

    get_settings.cache_clear()
    get_engine.cache_clear()
    engine = make_engine(url)
    with Session(engine) as s:
        _, secret = keys.create_key(s, f"bench-{time.monotonic_ns()}", "write")  # one per repeat
        s.commit()
    engine.dispose()
    with TestClient(create_app(start_scheduler=False)) as client:
        t0 = time.perf_counter()
        r = client.post(
            "/api/v1/fixtures/import",
            content=data,
            headers={"Authorization": f"Bearer {secret}", "Content-Type": "text/csv"},
        )
        dt = time.perf_counter() - t0
    assert r.status_code == 200, r.text[:500]
    get_engine().dispose()
    get_engine.cache_clear()
    return dt


def report(label: str, seconds: float, fixtures: int, lamps: int) -> None:
    """One result line."""
    print(
        f"{label:<28} {seconds:6.2f} s  {fixtures / seconds:9,.0f} fixtures/s  "
        f"{(fixtures + lamps) / seconds:9,.0f} rows/s  ({fixtures:,} fixtures, {lamps:,} lamps)"
        f"  {'OK' if seconds <= 20 else 'OVER 20 s'}"
    )


def pg_scratch(server_url: str, name: str, create: bool) -> str:
    """Create (or drop) a scratch database on the server; returns its URL."""
    admin = create_engine(server_url, isolation_level="AUTOCOMMIT")
    with admin.connect() as conn:
        conn.execute(text(f'DROP DATABASE IF EXISTS "{name}" WITH (FORCE)'))
        if create:
            conn.execute(text(f'CREATE DATABASE "{name}"'))
    admin.dispose()
    return make_url(server_url).set(database=name).render_as_string(hide_password=False)


TABLES = ["fixtures", "lamp_positions"]


def bench_db(kind: str, url: str, data: bytes, rows: int, repeats: int, table: Table) -> None:
    """Interleave: import through the API, then the raw insert of the rows it stored."""
    migrate(url)
    seed(url)
    api: list[float] = []
    raw: list[float] = []
    lamps = 0
    for _ in range(repeats):
        _rawcopy.clear(url, TABLES)
        api.append(run_http(url, data))
        snap = _rawcopy.snapshot(url, TABLES)
        lamps = len(snap["lamp_positions"][1])
        assert len(snap["fixtures"][1]) == rows, "the import did not store every fixture"
        _rawcopy.clear(url, TABLES)
        raw.append(_rawcopy.raw_insert(url, snap))
    way = "COPY" if kind == "postgresql" else "executemany"
    fig, anc = statistics.median(api), statistics.median(raw)
    table.add(
        Row(
            "P4",
            f"fixture import via API, {rows:,} fixtures + {lamps:,} lamps, {kind}",
            fig,
            f"raw {way} of the same rows",
            anc,
            repeats,
            ">= 50% of raw (ratio <= 2); <= 5 s",
            note=f"{(rows + lamps) / fig:,.0f} rows/s",
        )
    )


def main() -> int:
    """Generate the CSV, import it into fresh SQLite and PostgreSQL databases, print figures."""
    ap = parser(__doc__, default_repeats=3)
    ap.add_argument("--rows", type=int, default=100_000)
    ap.add_argument("--pg", default="postgresql+psycopg://postgres@127.0.0.1:5432/postgres")
    ap.add_argument("--scratch", default="bench_import", help="scratch database name")
    ap.add_argument("--no-pg", action="store_true", help="skip PostgreSQL")
    args = ap.parse_args()
    rows = 300 if args.quick else args.rows
    repeats = 1 if args.quick else args.repeats
    data, lamps = make_csv(rows)
    print(f"CSV: {rows:,} fixtures, {lamps:,} lamps, {len(data) / 1e6:.1f} MB")
    table = Table("bench_import", args.quick)
    with tempfile.TemporaryDirectory() as tmp:
        bench_db("sqlite", f"sqlite:///{tmp}/bench.sqlite3", data, rows, repeats, table)
    if not args.no_pg:
        url = pg_scratch(args.pg, args.scratch, create=True)
        try:
            bench_db("postgresql", url, data, rows, repeats, table)
        finally:
            pg_scratch(args.pg, args.scratch, create=False)
    table.finish(args.json)
    return 0


if __name__ == "__main__":
    sys.exit(main())
