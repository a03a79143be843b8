"""Time a bulk upload of 1,000,000 burn-hour rows through the HTTP API on PostgreSQL.

10,000 fixtures x 100 daily period totals, posted as one CSV to POST /api/v1/burn-hours/bulk
(FastAPI TestClient): parsing, vectorised validation (targets, negative and excess hours,
future dates, overlaps with stored rows), COPY into burn_hour_records, commit. A second
upload of the same file must be refused (409: every row overlaps) and store nothing.
Scratch database only: bench_burn_upload on the local server (--scratch NAME for another
name), or with --sqlite a temporary SQLite file.

Run: python benchmarks/bench_burn_upload.py [rows] [--scratch NAME] [--sqlite]
"""

from __future__ import annotations

import argparse
import os
import sys
import tempfile
import time
from datetime import UTC, date, datetime, timedelta
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

PG_ADMIN = "postgresql+psycopg://postgres@127.0.0.1:5432/postgres"
PG_SERVER = "postgresql+psycopg://postgres@127.0.0.1:5432/"
N_FIXTURES = 10_000


def setup(url: str, scratch: str | None) -> tuple[list[int], str]:
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
                for i in range(N_FIXTURES)
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


def main() -> None:
    """Upload the CSV once (stored), then again (refused), printing the timings."""
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("rows", nargs="?", type=int, default=1_000_000)
    ap.add_argument("--scratch", default="bench_burn_upload", help="scratch database name")
    ap.add_argument("--sqlite", action="store_true", help="a temporary SQLite file instead")
    args = ap.parse_args()
    with tempfile.TemporaryDirectory() as tmp:
        if args.sqlite:
            run(f"sqlite:///{tmp}/bench.sqlite3", None, args.rows)
        else:
            run(PG_SERVER + args.scratch, args.scratch, args.rows)


def run(url: str, scratch: str | None, rows: int) -> None:
    """One database: set up, time the two uploads, count what was stored."""
    ids, key = setup(url, scratch)
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
    t = time.perf_counter()
    r = client.post("/api/v1/burn-hours/bulk", content=body, headers=headers)
    took = time.perf_counter() - t
    assert r.status_code == 201, r.text[:500]
    print(
        f"POST /burn-hours/bulk: {r.json()['stored']:,} rows in {took:.1f} s "
        f"({len(body) / 1e6:.0f} MB CSV) at {datetime.now(UTC):%Y-%m-%d %H:%M} UTC"
    )
    t = time.perf_counter()
    again = client.post("/api/v1/burn-hours/bulk", content=body, headers=headers)
    print(
        f"same upload again: {again.status_code} ({again.json()['error_count']:,} errors) "
        f"in {time.perf_counter() - t:.1f} s"
    )
    with get_engine().connect() as c:
        n = c.execute(text("SELECT count(*) FROM burn_hour_records")).scalar()
    print(f"rows stored: {n:,}")
    get_engine().dispose()
    get_engine.cache_clear()
    if scratch is not None:
        from sqlalchemy import create_engine

        admin = create_engine(PG_ADMIN, isolation_level="AUTOCOMMIT")
        with admin.connect() as c:
            c.execute(text(f'DROP DATABASE IF EXISTS "{scratch}" WITH (FORCE)'))
        admin.dispose()


if __name__ == "__main__":
    main()
