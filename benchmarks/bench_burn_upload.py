"""Time a bulk upload of 1,000,000 burn-hour rows through the HTTP API on PostgreSQL.

10,000 fixtures x 100 daily period totals, posted as one CSV to POST /api/v1/burn-hours/bulk
(FastAPI TestClient): parsing, vectorised validation (targets, negative and excess hours,
future dates, overlaps with stored rows), COPY into burn_hour_records, commit. A second
upload of the same file must be refused (409: every row overlaps) and store nothing.
Scratch database only: bench_burn_upload on the local server (--scratch NAME for another
name), or with --sqlite a temporary SQLite file.

Run: python benchmarks/bench_burn_upload.py [rows] [--scratch NAME] [--sqlite] [--quick]
P7: the upload (median of repeats) against a COPY of the very rows it stored, interleaved;
peak memory of the process (server and client share it under the test client).
"""

from __future__ import annotations

import os
import resource
import statistics
import sys
import tempfile
import time
from datetime import date, timedelta
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))
sys.path.insert(0, str(Path(__file__).resolve().parent))

import _rawcopy
from _table import Row, Table, parser

PG_ADMIN = "postgresql+psycopg://postgres@127.0.0.1:5432/postgres"
PG_SERVER = "postgresql+psycopg://postgres@127.0.0.1:5432/"
N_FIXTURES = 10_000


def setup(url: str, scratch: str | None, n_fixtures: int = N_FIXTURES) -> tuple[list[int], str]:
    """Fresh database with one site, 20 areas, N_FIXTURES fixtures; returns ids and a key."""
    from sqlalchemy import create_engine, insert, text
    from sqlalchemy.orm import Session

    from service.catalogue.models import LampType
    from service.db.session import make_engine
    from service.keys import service as keys
    from service.register.models import Area, Fixture, Site
    from tests.conftest import migrate

    if scratch is not None:
        admin = create_engine(PG_ADMIN, isolation_level="AUTOCOMMIT")
        with admin.connect() as c:
            c.execute(text(f'DROP DATABASE IF EXISTS "{scratch}" WITH (FORCE)'))
            c.execute(text(f'CREATE DATABASE "{scratch}"'))
        admin.dispose()
    eng = make_engine(url)
    migrate(eng)
    with Session(eng) as s:
        site = Site(
            name="Upload Yard",
            time_zone="America/Chicago",
            nominal_voltage_v=120.0,
            currency="USD",
            energy_price_per_kwh=0.15,
            labour_rate_per_h=45.0,
        )
        lt = LampType(
            code="U-T8",
            technology="linear_fluorescent",
            rated_watts=32,
            rated_volts=120,
            rated_life_h=24000.0,
        )
        s.add_all([site, lt])
        s.flush()
        s.execute(insert(Area), [{"site_id": site.id, "name": f"Zone {i}"} for i in range(20)])
        areas = [a.id for a in s.query(Area).order_by(Area.id)]
        s.execute(
            insert(Fixture),
            [
                {
                    "site_id": site.id,
                    "area_id": areas[i % 20],
                    "tag": f"U{i:05d}",
                    "lamp_type_id": lt.id,
                }
                for i in range(n_fixtures)
            ],
        )
        ids = [r[0] for r in s.query(Fixture.id).order_by(Fixture.id)]
        _, secret = keys.create_key(s, "bench-writer", "write")
        s.commit()
    eng.dispose()
    return ids, secret


def csv_body(ids: list[int], rows: int) -> bytes:
    """Daily totals (local calendar days) for each fixture, rows in all."""
    per = rows // len(ids)
    start = date(2025, 1, 1)
    days = [(start + timedelta(days=d)).isoformat() for d in range(per)]
    lines = ["fixture_id,day,hours,starts"]
    for f in ids:
        for d, day in enumerate(days):
            lines.append(f"{f},{day},{8 + (f + d) % 9}.5,{1 + d % 3}")
    return ("\n".join(lines) + "\n").encode()


def main() -> int:
    """Upload the CSV (median of repeats against raw COPY), then again (refused)."""
    ap = parser(__doc__, default_repeats=3)
    ap.add_argument("rows", nargs="?", type=int, default=1_000_000)
    ap.add_argument("--scratch", default="bench_burn_upload", help="scratch database name")
    ap.add_argument("--sqlite", action="store_true", help="a temporary SQLite file instead")
    args = ap.parse_args()
    rows = 2_000 if args.quick else args.rows
    repeats = 1 if args.quick else args.repeats
    table = Table("bench_burn_upload", args.quick)
    with tempfile.TemporaryDirectory() as tmp:
        if args.sqlite:
            run(f"sqlite:///{tmp}/bench.sqlite3", None, rows, repeats, table)
        else:
            run(PG_SERVER + args.scratch, args.scratch, rows, repeats, table)
    table.finish(args.json)
    return 0


def run(url: str, scratch: str | None, rows: int, repeats: int, table: Table) -> None:
    """One database: set up, time uploads against raw inserts, check the refused repeat."""
    ids, key = setup(url, scratch, min(N_FIXTURES, max(rows // 100, 1)))
    body = csv_body(ids, rows)
    os.environ["LAMPKEEPER_DATABASE_URL"] = url
    from fastapi.testclient import TestClient
    from sqlalchemy import text

    from service.config import get_settings
    from service.db.session import get_engine
    from service.main import create_app

    get_settings.cache_clear()
    get_engine.cache_clear()
    client = TestClient(create_app(start_scheduler=False))
    headers = {"Authorization": f"Bearer {key}", "content-type": "text/csv"}
    api: list[float] = []
    raw: list[float] = []
    tables = ["burn_hour_records"]
    peak_mb = 0.0
    for _ in range(repeats):
        _rawcopy.clear(url, tables)
        t = time.perf_counter()
        r = client.post("/api/v1/burn-hours/bulk", content=body, headers=headers)
        api.append(time.perf_counter() - t)
        assert r.status_code == 201, r.text[:500]
        assert r.json()["stored"] == rows
        if not peak_mb:  # high-water mark before the anchor's snapshot adds its own rows
            peak_mb = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024.0  # KiB
        snap = _rawcopy.snapshot(url, tables)
        _rawcopy.clear(url, tables)
        raw.append(_rawcopy.raw_insert(url, snap))
    kind = "SQLite" if scratch is None else "PostgreSQL"
    table.add(
        Row(
            "P7",
            f"burn-hour upload via API, {rows:,} rows, {kind}",
            statistics.median(api),
            "COPY of the same rows" if scratch else "executemany of the same rows",
            statistics.median(raw),
            repeats,
            ">= 40% of COPY (ratio <= 2.5); <= 8 s; <= 1 GB",
            note=f"peak RSS through the first upload {peak_mb:,.0f} MB, {len(body) / 1e6:.0f} MB CSV",
        )
    )
    t = time.perf_counter()
    again = client.post("/api/v1/burn-hours/bulk", content=body, headers=headers)
    print(
        f"same upload again: {again.status_code} ({again.json()['error_count']:,} errors) "
        f"in {time.perf_counter() - t:.1f} s"
    )
    assert again.status_code == 409, again.text[:300]
    with get_engine().connect() as c:
        n = c.execute(text("SELECT count(*) FROM burn_hour_records")).scalar()
    assert n == rows, f"{n} rows stored, expected {rows}"
    get_engine().dispose()
    get_engine.cache_clear()
    if scratch is not None:
        from sqlalchemy import create_engine

        admin = create_engine(PG_ADMIN, isolation_level="AUTOCOMMIT")
        with admin.connect() as c:
            c.execute(text(f'DROP DATABASE IF EXISTS "{scratch}" WITH (FORCE)'))
        admin.dispose()


if __name__ == "__main__":
    sys.exit(main())
