"""P3: GET /api/v1/fixtures?limit=50 through the service vs a bare FastAPI app, 32 clients.

For each database (SQLite, PostgreSQL): migrate and load the demo (350 fixtures), start the
service (`lampkeeper serve`, one worker) and the anchor (benchmarks/_bare_list.py: the same
count, page and positions SELECTs, no middleware, no ORM) with the same uvicorn settings, one
at a time, and drive each with --clients concurrent keep-alive clients (asyncio + httpx, in
this process) for --seconds. The two servers alternate, --repeats times, so machine load
hits both alike; each row is the median over the repeats. Rows: seconds per request at the
measured throughput (1 / requests per second; ratio = anchor throughput / service
throughput, target ≤ 2, i.e. the service reaches ≥ 50 % of the anchor) and the p99 latency
(target ≤ 50 ms on PostgreSQL); p50/p95/p99 of both in the note. Any answer other than 200
fails the run.

Run: python benchmarks/bench_list.py [--quick] [--db sqlite,postgresql] [--clients 32]
     [--seconds 10] [--repeats 3] [--pg-url postgresql+psycopg://postgres@127.0.0.1:5432/x]
The PostgreSQL database is emptied (schema public dropped) first: give a scratch one.
"""

from __future__ import annotations

import asyncio
import os
import statistics
import subprocess
import sys
import tempfile
import time
from dataclasses import dataclass
from pathlib import Path

import httpx
import numpy as np

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT / "benchmarks"))

import bench_load  # noqa: E402
from _table import Row, Table  # noqa: E402
from _table import parser as table_parser  # noqa: E402

DEFAULT_PG = "postgresql+psycopg://postgres@127.0.0.1:5432/bench_list"
PATH = "/api/v1/fixtures"
PARAMS = {"limit": 50}


@dataclass
class Run:
    """One timed run against one server."""

    requests: int
    seconds: float
    latency_s: np.ndarray
    bad: dict[int, int]

    @property
    def rps(self) -> float:
        """Answers per second."""
        return self.requests / self.seconds

    def pct(self, q: float) -> float:
        """A latency percentile in seconds."""
        return float(np.percentile(self.latency_s, q))


async def _drive(base: str, key: str, clients: int, seconds: float) -> Run:
    """Clients concurrent requests, each client sending its next as soon as it has an answer."""
    latencies: list[float] = []
    bad: dict[int, int] = {}
    limits = httpx.Limits(max_connections=clients, max_keepalive_connections=clients)
    headers = {"Authorization": f"Bearer {key}"}
    async with httpx.AsyncClient(base_url=base, headers=headers, limits=limits, timeout=60) as c:
        for _ in range(clients):  # warm up: every connection open, every worker thread started
            await c.get(PATH, params=PARAMS)
        await asyncio.gather(*(c.get(PATH, params=PARAMS) for _ in range(clients)))
        until = time.perf_counter() + seconds

        async def one_client() -> None:
            while time.perf_counter() < until:
                t0 = time.perf_counter()
                r = await c.get(PATH, params=PARAMS)
                latencies.append(time.perf_counter() - t0)
                if r.status_code != 200:
                    bad[r.status_code] = bad.get(r.status_code, 0) + 1

        t0 = time.perf_counter()
        await asyncio.gather(*(one_client() for _ in range(clients)))
        elapsed = time.perf_counter() - t0
    return Run(len(latencies), elapsed, np.array(latencies), bad)


def start_bare(env: dict[str, str], port: int) -> subprocess.Popen[bytes]:
    """The anchor app, with the uvicorn settings `lampkeeper serve` uses (one worker)."""
    code = (
        "import uvicorn; uvicorn.run('_bare_list:create_app', factory=True, host='127.0.0.1', "
        f"port={port}, workers=1, log_level='warning', access_log=False)"
    )
    proc = subprocess.Popen([sys.executable, "-c", code], env=env, cwd=ROOT / "benchmarks")
    bench_load.wait_healthy(proc, port, "/api/v1/fixtures?limit=1")
    return proc


def measure(label: str, url: str, clients: int, seconds: float, repeats: int, table: Table) -> bool:
    """Both servers on one database, alternating; adds the rows; False on a non-200 answer."""
    with tempfile.TemporaryDirectory() as tmp:
        env, key = bench_load.prepare(url, Path(tmp))
        env = {**env, "LAMPKEEPER_LOG_LEVEL": "warning"}
        service: list[Run] = []
        bare: list[Run] = []
        for _ in range(repeats):
            for runs, start in ((service, bench_load.start_server), (bare, start_bare)):
                port = bench_load.free_port()
                proc = start(env, port)
                try:
                    base = f"http://127.0.0.1:{port}"
                    runs.append(asyncio.run(_drive(base, key, clients, seconds)))
                finally:
                    proc.terminate()
                    proc.wait(timeout=30)
    ok = True
    for name, runs in (("service", service), ("bare", bare)):
        for r in runs:
            ok &= not r.bad
            print(
                f"{label} {name}: {r.requests} in {r.seconds:.1f} s = {r.rps:.0f}/s, p50 "
                f"{r.pct(50) * 1e3:.1f} p95 {r.pct(95) * 1e3:.1f} p99 {r.pct(99) * 1e3:.1f} ms"
                + (f", NOT 200: {r.bad}" if r.bad else "")
            )

    def med(runs: list[Run], fn: str, *a: float) -> float:
        return statistics.median(getattr(r, fn)(*a) if a else getattr(r, fn) for r in runs)

    s_rps, b_rps = med(service, "rps"), med(bare, "rps")
    note = (
        f"{s_rps:.0f} vs {b_rps:.0f} req/s = {s_rps / b_rps:.0%} of the anchor; "
        "p50/p95/p99 ms service "
        + "/".join(f"{med(service, 'pct', q) * 1e3:.1f}" for q in (50, 95, 99))
        + ", bare "
        + "/".join(f"{med(bare, 'pct', q) * 1e3:.1f}" for q in (50, 95, 99))
    )
    table.add(
        Row(
            "P3",
            f"{label} GET /fixtures?limit=50, {clients} clients, s per answer",
            1.0 / s_rps,
            "bare FastAPI, same SELECTs, 1/throughput",
            1.0 / b_rps,
            repeats,
            "ratio ≤ 2 (≥ 50% of its throughput)",
            note,
        )
    )
    table.add(
        Row(
            "P3",
            f"{label} GET /fixtures?limit=50, {clients} clients, p99",
            med(service, "pct", 99),
            "bare FastAPI, same SELECTs, p99",
            med(bare, "pct", 99),
            repeats,
            "≤ 50 ms on PostgreSQL" if label == "PostgreSQL" else "",
        )
    )
    return ok


def main() -> int:
    """Run P3 on the chosen databases and write the rows."""
    parser = table_parser(__doc__, default_repeats=3)
    parser.add_argument("--clients", type=int, default=32)
    parser.add_argument("--seconds", type=float, default=10.0)
    parser.add_argument("--db", default="sqlite,postgresql", help="sqlite, postgresql or both")
    parser.add_argument("--pg-url", default=DEFAULT_PG)
    args = parser.parse_args()
    if args.quick:
        args.seconds, args.repeats = 1.5, 1
        if "--db" not in sys.argv:
            args.db = "sqlite"
    os.environ.pop("LAMPKEEPER_WORKERS", None)
    bench_load.WORKERS = 1
    table = Table("bench_list", args.quick)
    ok = True
    for db in args.db.split(","):
        if db == "sqlite":
            with tempfile.TemporaryDirectory() as tmp:
                url = f"sqlite:///{Path(tmp) / 'bench.sqlite3'}"
                ok &= measure("SQLite", url, args.clients, args.seconds, args.repeats, table)
        elif db == "postgresql":
            bench_load.ensure_database(args.pg_url)
            ok &= measure(
                "PostgreSQL", args.pg_url, args.clients, args.seconds, args.repeats, table
            )
        else:
            parser.error(f"unknown database {db}")
    table.finish(args.json)
    return 0 if ok else 1


if __name__ == "__main__":
    sys.exit(main())
