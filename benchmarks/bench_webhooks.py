"""Webhook delivery throughput to a local receiver, beside bare signed POSTs (the anchor).

A scratch database (SQLite file by default, or a PostgreSQL URL) gets N site changes and
one subscription to an http.server receiver on loopback; the delivery worker then drains
the outbox (fan-out, claims, POSTs, attempt records). The anchor POSTs the same signed
bodies with the same kept httpx client and no database. Medians of the repeats; row W1
(seconds for N, the ratio is the worker's time over the bare POSTs'; rates in the note).
Run: python benchmarks/bench_webhooks.py [URL] [--n N] [--repeats R] [--quick] [--json PATH]
(--quick: 100 changes, one repeat, SQLite).
"""

from __future__ import annotations

import statistics
import sys
import tempfile
import time
from pathlib import Path

import httpx
from alembic import command
from sqlalchemy import text
from sqlalchemy.engine import make_url

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))
sys.path.insert(0, str(ROOT / "benchmarks"))

from _table import Row, Table, parser  # noqa: E402

from service.api.health import alembic_config  # noqa: E402
from service.config import get_settings  # noqa: E402
from service.db.session import begin_write, make_engine, session_factory  # noqa: E402
from service.webhooks.schemas import SubscriptionCreate  # noqa: E402
from service.webhooks.service import create_subscription  # noqa: E402
from service.webhooks.signing import sign  # noqa: E402
from service.webhooks.worker import Deliverer  # noqa: E402
from tests.changes.slow_writer import site  # noqa: E402
from tests.webhooks.receiver import receiver  # noqa: E402

BASE = ""  # a scratch PostgreSQL URL, or a SQLite file in a temporary directory (main sets it)
N = 2000


def _admin(url: str, sql: str) -> None:
    """One statement on the server's postgres database (autocommit)."""
    admin = make_engine(
        make_url(url).set(database="postgres").render_as_string(hide_password=False)
    )
    with admin.connect().execution_options(isolation_level="AUTOCOMMIT") as c:
        c.execute(text(sql))
    admin.dispose()


def scratch(tmp: Path, tag: str) -> str:
    """A freshly migrated database for one round (a SQLite file, or a PostgreSQL clone)."""
    if BASE.startswith("postgresql"):
        url = make_url(BASE).set(database=tag).render_as_string(hide_password=False)
        _admin(url, f'DROP DATABASE IF EXISTS "{tag}" WITH (FORCE)')
        _admin(url, f'CREATE DATABASE "{tag}"')
    else:
        url = f"sqlite:///{tmp / f'{tag}.sqlite3'}"
    engine = make_engine(url)
    cfg = alembic_config()
    cfg.attributes["configure_logger"] = False
    with engine.begin() as conn:
        cfg.attributes["connection"] = conn
        command.upgrade(cfg, "head")
    engine.dispose()
    return url


def drop_scratch(url: str) -> None:
    """Drop a round's PostgreSQL database (a SQLite file goes with its directory)."""
    if url.startswith("postgresql"):
        _admin(url, f'DROP DATABASE IF EXISTS "{make_url(url).database}" WITH (FORCE)')


def one_round(tmp: Path, rep: int) -> tuple[float, float]:
    """(deliveries/s through the worker, bare signed POSTs/s) for N changes."""
    url = scratch(tmp, f"bench_hooks_{rep}")
    engine = make_engine(url)
    factory = session_factory(engine)
    settings = get_settings()
    settings.webhook_allow_loopback = True
    settings.webhook_batch = 200
    try:
        with receiver() as rec:
            with factory() as s:
                begin_write(s)
                create_subscription(s, SubscriptionCreate(url=rec.url))
                s.commit()
            with factory() as s:
                begin_write(s)
                s.add_all([site(f"Bench Hook {i}") for i in range(N)])
                s.commit()
            worker = Deliverer(factory)
            t0 = time.perf_counter()
            queued = 0
            while len(rec.got) < N:
                stats = worker.run_pass()
                queued += stats.fanned_out
                if stats.claimed == 0 and queued >= N:
                    break
            dt = time.perf_counter() - t0
            assert len(rec.got) == N, (len(rec.got), N)
            bodies = [r.body for r in rec.got]
            worker.close()
            with httpx.Client(timeout=10) as client:
                t1 = time.perf_counter()
                for body in bodies:
                    ts = int(time.time())
                    client.post(
                        rec.url,
                        content=body,
                        headers={"X-LampKeeper-Signature": sign("s", ts, body)},
                    )
                dt_anchor = time.perf_counter() - t1
    finally:
        engine.dispose()
        drop_scratch(url)
    return dt, dt_anchor


def main() -> int:
    """Repeat rounds; the medians as a table row."""
    global BASE, N
    ap = parser(__doc__, default_repeats=3)
    ap.add_argument("url", nargs="?", default="", help="scratch PostgreSQL URL (default SQLite)")
    ap.add_argument("--n", type=int, default=N, help="changes delivered per round")
    args = ap.parse_args()
    BASE = args.url
    N = 100 if args.quick else args.n
    repeats = 1 if args.quick else args.repeats
    with tempfile.TemporaryDirectory() as d, factory_silence():
        rounds = [one_round(Path(d), r) for r in range(repeats)]
    worker = statistics.median(r[0] for r in rounds)
    anchor = statistics.median(r[1] for r in rounds)
    db = "PostgreSQL" if BASE.startswith("postgresql") else "SQLite"
    table = Table("bench_webhooks", args.quick)
    table.add(
        Row(
            "W1",
            f"worker delivers {N:,} changes to loopback ({db})",
            worker,
            f"{N:,} bare signed POSTs, same kept client",
            anchor,
            repeats,
            "",
            f"{N / worker:,.0f} deliveries/s; anchor {N / anchor:,.0f} POSTs/s",
        )
    )
    table.finish(args.json)
    return 0


class factory_silence:  # noqa: N801 (a tiny context manager)
    """Keep the worker's per-pass log lines out of the figures."""

    def __enter__(self) -> None:
        import logging

        logging.getLogger("service.webhooks.worker").setLevel(logging.WARNING)

    def __exit__(self, *exc: object) -> None:
        return None


if __name__ == "__main__":
    sys.exit(main())
