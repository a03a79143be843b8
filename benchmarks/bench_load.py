"""Load a real uvicorn server with mixed reads and writes, on SQLite and on PostgreSQL.

For each database: migrate, load the demo (`lampkeeper migrate`, `lampkeeper demo load`),
create an admin key (`lampkeeper keys create`), start `lampkeeper serve` as a subprocess,
then drive --clients threads (an httpx client each) for --seconds: lists, forecasts, relamp
plans and printable orders; writes of burn hours, burnout reports and work-order
transitions (create, issue, start, complete or cancel). Prints requests, answers by
status and p50/p95/p99 latency per kind, then checks the database: every 201 write is
stored, completes are done, no lamp removal is recorded twice for one position and time,
at most one open group order per area. Exits 1 when a check fails or a 5xx other than 503
was seen.

Two modes (--mode): "closed" (the saturation run: each client sends its next request as
soon as it has the answer, so the server runs flat out and the latency is what a full queue
gives) and "paced" (--rate R: each client sends on its own Poisson schedule of R / clients
requests per second, so the offered load is R req/s whatever the server does; latency is
measured from each request's scheduled send time, not from when the client got round to
it, so a slow answer that delays the client's next request counts against the server
instead of hiding it: no coordinated omission). "both" runs the saturation run, then one
paced run per rate. Every run prints its mode and rate.

Run: python benchmarks/bench_load.py [--clients 50] [--seconds 60] [--db sqlite,postgresql]
     [--workers 1|2] [--mode closed|paced|both] [--rate 20[,40]]
     [--pg-url postgresql+psycopg://postgres@127.0.0.1:5432/bench_load]
The PostgreSQL database is created when missing and emptied (schema public dropped) first:
give a scratch one. More than one worker needs PostgreSQL (SQLite is skipped then).
"""

from __future__ import annotations

import os
import random
import socket
import subprocess
import sys
import tempfile
import threading
import time
from collections import Counter, defaultdict
from dataclasses import dataclass, field
from datetime import UTC, datetime, timedelta
from pathlib import Path
from typing import Any

import httpx
import numpy as np
from sqlalchemy import create_engine, text
from sqlalchemy.engine import make_url

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT / "benchmarks"))

from _table import Row, Table  # noqa: E402
from _table import parser as table_parser  # noqa: E402

LAMPKEEPER = str(Path(sys.executable).with_name("lampkeeper"))
DEFAULT_PG = "postgresql+psycopg://postgres@127.0.0.1:5432/bench_load"
# Share of each kind of request in the mix (reads dominate, as in a maintenance office).
MIX = {
    "list": 30,
    "forecast": 12,
    "plan": 10,
    "print": 8,
    "burn_hours": 15,
    "burnout": 10,
    "transition": 15,
}
WRITE_KINDS = ("burn_hours", "burnout", "transition")
LATE_S = 0.010  # a paced request sent this long after its scheduled time started late
GRACE_S = 30.0  # paced: seconds after the window in which late requests are still sent


@dataclass
class Demo:
    """The ids a client picks from."""

    sites: list[int]
    areas: list[int]
    fixtures: list[int]
    positions: list[int]


@dataclass
class Tally:
    """What the clients saw, shared under a lock."""

    lock: threading.Lock = field(default_factory=threading.Lock)
    latency: dict[str, list[float]] = field(default_factory=lambda: defaultdict(list))
    statuses: dict[str, Counter[int]] = field(default_factory=lambda: defaultdict(Counter))
    created: dict[str, list[int]] = field(default_factory=lambda: defaultdict(list))
    completed: list[int] = field(default_factory=list)
    orders: list[int] = field(default_factory=list)
    late: int = 0  # paced requests sent more than LATE_S after their scheduled time
    unsent: int = 0  # paced requests still unsent GRACE_S after the window closed

    def add(self, kind: str, status: int, seconds: float) -> None:
        with self.lock:
            self.latency[kind].append(seconds)
            self.statuses[kind][status] += 1


def run(cmd: list[str], env: dict[str, str]) -> str:
    """Run a lampkeeper command; its standard output."""
    done = subprocess.run(cmd, env=env, cwd=ROOT, capture_output=True, text=True, check=False)
    if done.returncode != 0:
        raise SystemExit(f"{' '.join(cmd)} failed:\n{done.stdout}\n{done.stderr}")
    return done.stdout


def prepare(url: str, workdir: Path) -> tuple[dict[str, str], str]:
    """Empty, migrate and load the demo into a database; (server env, admin key)."""
    if url.startswith("postgresql"):
        eng = create_engine(url)
        with eng.begin() as conn:
            conn.execute(text("DROP SCHEMA public CASCADE"))
            conn.execute(text("CREATE SCHEMA public"))
        eng.dispose()
    env = {
        **os.environ,
        "LAMPKEEPER_DATABASE_URL": url,
        "LAMPKEEPER_SCHEDULER_ENABLED": "false",
        "LAMPKEEPER_LOG_LEVEL": "warning",
        # Serve this checkout's code, whatever the console script was installed from.
        "PYTHONPATH": str(ROOT),
    }
    run([LAMPKEEPER, "migrate"], env)
    run([LAMPKEEPER, "demo", "load", "--key-file", str(workdir / "demo-key.txt")], env)
    key = run([LAMPKEEPER, "keys", "create", "--name", "bench", "--scope", "admin"], env)
    return env, key.strip().splitlines()[-1]


def free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return int(s.getsockname()[1])


WORKERS = 1  # worker processes of the served app (--workers)


def start_server(env: dict[str, str], port: int) -> subprocess.Popen[bytes]:
    """Start `lampkeeper serve` and wait until /healthz answers."""
    cmd = [LAMPKEEPER, "serve", "--host", "127.0.0.1", "--port", str(port)]
    proc = subprocess.Popen([*cmd, "--workers", str(WORKERS)], env=env, cwd=ROOT)
    wait_healthy(proc, port)
    return proc


def wait_healthy(proc: subprocess.Popen[bytes], port: int, path: str = "/healthz") -> None:
    """Wait until a started server answers 200 on path (60 s at most)."""
    deadline = time.monotonic() + 60
    while time.monotonic() < deadline:
        try:
            if httpx.get(f"http://127.0.0.1:{port}{path}", timeout=1).status_code == 200:
                return
        except httpx.HTTPError:
            pass
        if proc.poll() is not None:
            raise SystemExit("the server exited at start-up")
        time.sleep(0.2)
    proc.terminate()
    raise SystemExit(f"the server did not answer {path} within 60 s")


def ensure_database(url: str) -> None:
    """Create a PostgreSQL database of the URL's name when it does not exist yet."""
    parsed = make_url(url)
    admin = create_engine(parsed.set(database="postgres"), isolation_level="AUTOCOMMIT")
    with admin.connect() as conn:
        name = parsed.database
        found = conn.execute(text("SELECT 1 FROM pg_database WHERE datname = :n"), {"n": name})
        if found.scalar() is None:
            conn.execute(text(f'CREATE DATABASE "{name}"'))
    admin.dispose()


def load_demo_ids(url: str) -> Demo:
    eng = create_engine(url)
    with eng.connect() as conn:

        def ids(table: str) -> list[int]:
            return [r[0] for r in conn.execute(text(f"SELECT id FROM {table} ORDER BY id"))]

        demo = Demo(ids("sites"), ids("areas"), ids("fixtures"), ids("lamp_positions"))
    eng.dispose()
    return demo


class Client(threading.Thread):
    """One client: picks a kind of request by MIX and sends it until the deadline."""

    def __init__(
        self,
        no: int,
        base: str,
        key: str,
        demo: Demo,
        tally: Tally,
        until: float,
        rate: float | None = None,
    ):
        super().__init__(daemon=True)
        self.no, self.demo, self.tally, self.until = no, demo, tally, until
        self.rate = rate  # this client's requests per second (paced), None: closed loop
        self.scheduled: float | None = None  # perf_counter time the next request is due
        self.rng = random.Random(no)
        self.http = httpx.Client(
            base_url=base + "/api/v1", headers={"Authorization": f"Bearer {key}"}, timeout=60
        )
        # Burn-hour periods: this client's own fixtures, hour by hour from 2025-01-01
        # (before the demo's records), so no two uploads overlap (that would be a 409).
        self.fixtures = demo.fixtures[no :: max(1, 50)] or demo.fixtures
        self.cursor = {f: datetime(2025, 1, 1, tzinfo=UTC) for f in self.fixtures}
        self.order: dict[str, Any] | None = None  # the order this client moves along

    def call(self, kind: str, method: str, path: str, **kw: Any) -> httpx.Response | None:
        # Paced: from the scheduled send time (a late start is the server's delay too).
        t0 = time.perf_counter() if self.scheduled is None else self.scheduled
        if self.scheduled is not None and time.perf_counter() - t0 > LATE_S:
            with self.tally.lock:
                self.tally.late += 1
        self.scheduled = None
        try:
            r = self.http.request(method, path, **kw)
        except httpx.HTTPError:
            self.tally.add(kind, 0, time.perf_counter() - t0)  # 0: no answer
            return None
        self.tally.add(kind, r.status_code, time.perf_counter() - t0)
        return r

    def run(self) -> None:
        kinds, weights = list(MIX), list(MIX.values())
        # The Poisson schedule runs on perf_counter, the clock latencies are taken on.
        end = time.perf_counter() + (self.until - time.monotonic())
        due = time.perf_counter()
        while self.rate is not None or time.monotonic() < self.until:
            if self.rate is not None:
                # Paced: every request scheduled inside the window is sent, late if need
                # be, up to GRACE_S after it; the rest are counted as never sent.
                due += self.rng.expovariate(self.rate)
                if due >= end:
                    break
                if time.perf_counter() > end + GRACE_S:
                    with self.tally.lock:
                        self.tally.unsent += 1
                    continue
                wait = due - time.perf_counter()
                if wait > 0:
                    time.sleep(wait)
                self.scheduled = due
            kind = self.rng.choices(kinds, weights)[0]
            getattr(self, kind)()
            self.scheduled = None  # a kind that sent nothing (no order to print yet)
        self.http.close()

    def list(self) -> None:
        path = self.rng.choice(["/fixtures", "/burnout-reports", "/work-orders", "/lamp-removals"])
        self.call("list", "GET", path, params={"limit": 50})

    def forecast(self) -> None:
        self.call("forecast", "GET", f"/forecasts/areas/{self.rng.choice(self.demo.areas)}")

    def plan(self) -> None:
        self.call("plan", "GET", f"/areas/{self.rng.choice(self.demo.areas)}/relamp-plan")

    def print(self) -> None:
        with self.tally.lock:
            orders = list(self.tally.orders)
        if orders:
            self.call("print", "GET", f"/work-orders/{self.rng.choice(orders)}/print")

    def burn_hours(self) -> None:
        fixture = self.rng.choice(self.fixtures)
        start = self.cursor[fixture]
        self.cursor[fixture] = start + timedelta(hours=1)
        body = {
            "fixture_id": fixture,
            "period_start": start.isoformat(),
            "period_end": (start + timedelta(hours=1)).isoformat(),
            "hours": 0.75,
        }
        r = self.call("burn_hours", "POST", "/burn-hours", json=body)
        self._created("burn_hours", r)

    def burnout(self) -> None:
        body = {
            "position_id": self.rng.choice(self.demo.positions),
            "reported_at": datetime.now(UTC).isoformat(),
            "replaced": True,
        }
        self._created("burnout", self.call("burnout", "POST", "/burnout-reports", json=body))

    def transition(self) -> None:
        """Create a group order for an area, then issue, start, complete (or cancel) it."""
        if self.order is None:
            body = {"area_id": self.rng.choice(self.demo.areas), "kind": "group_relamp"}
            r = self.call("transition", "POST", "/work-orders", json=body)
            self._created("transition", r)
            if r is not None and r.status_code == 201:
                self.order = r.json()
                with self.tally.lock:
                    self.tally.orders.append(self.order["id"])
            return
        oid, state = self.order["id"], self.order["state"]
        step = {"draft": "issue", "issued": "start", "in_progress": "complete"}[state]
        if self.rng.random() < 0.1:
            step = "cancel"
        body = {"others": "replaced"} if step == "complete" else {}
        r = self.call("transition", "POST", f"/work-orders/{oid}/{step}", json=body)
        if r is not None and r.status_code == 200:
            self.order = r.json()
            if step == "complete":
                with self.tally.lock:
                    self.tally.completed.append(oid)
        if (
            self.order is None
            or self.order["state"] in ("done", "cancelled")
            or (r is not None and r.status_code >= 400)
        ):
            self.order = None

    def _created(self, kind: str, r: httpx.Response | None) -> None:
        if r is not None and r.status_code == 201:
            with self.tally.lock:
                self.tally.created[kind].append(int(r.json()["id"]))


def mode_label(rate: float | None) -> str:
    """The run's mode as printed: closed loop (saturation) or paced at an offered rate."""
    if rate is None:
        return "closed loop (saturation)"
    return f"paced, offered {rate:g} req/s (Poisson, latency from the scheduled send time)"


def report(label: str, tally: Tally, seconds: float, rate: float | None = None) -> None:
    total = sum(len(v) for v in tally.latency.values())
    load = " ".join(f"{x:.2f}" for x in os.getloadavg())
    print(
        f"\n== {label}, {WORKERS} worker(s), {mode_label(rate)}: {total} requests in "
        f"{seconds:.0f} s ({total / seconds:.1f}/s answered); load average now {load}"
    )
    if rate is not None:
        print(
            f"requests sent over {LATE_S * 1e3:.0f} ms late (client still waiting): "
            f"{tally.late}; scheduled but never sent (over {GRACE_S:.0f} s behind): {tally.unsent}"
        )
    print(f"{'kind':<11}{'n':>7}{'p50 ms':>9}{'p95 ms':>9}{'p99 ms':>9}  statuses")
    for kind in MIX:
        lat = np.array(tally.latency.get(kind, [])) * 1000
        if lat.size == 0:
            continue
        p50, p95, p99 = np.percentile(lat, [50, 95, 99])
        statuses = " ".join(f"{s}:{n}" for s, n in sorted(tally.statuses[kind].items()))
        print(f"{kind:<11}{lat.size:>7}{p50:>9.0f}{p95:>9.0f}{p99:>9.0f}  {statuses}")
    every = np.concatenate([np.array(v) for v in tally.latency.values()]) * 1000
    if every.size:
        p50, p95, p99 = np.percentile(every, [50, 95, 99])
        print(f"{'all':<11}{every.size:>7}{p50:>9.0f}{p95:>9.0f}{p99:>9.0f}")
    everything = Counter[int]()
    for c in tally.statuses.values():
        everything.update(c)
    print("all statuses:", dict(sorted(everything.items())))


TABLES = {
    "burn_hours": "burn_hour_records",
    "burnout": "burnout_reports",
    "transition": "work_orders",
}


def check(url: str, tally: Tally) -> list[str]:
    """Every 201 stored, completes done, no duplicate removals, one open group per area."""
    problems = []
    eng = create_engine(url)
    with eng.connect() as conn:
        for kind, ids in tally.created.items():
            stored = {r[0] for r in conn.execute(text(f"SELECT id FROM {TABLES[kind]}"))}
            missing = set(ids) - stored
            if missing:
                problems.append(f"{kind}: {len(missing)} of {len(ids)} created rows missing")
        for oid in tally.completed:
            state = conn.execute(text("SELECT state FROM work_orders WHERE id = :i"), {"i": oid})
            if state.scalar() != "done":
                problems.append(f"work order {oid} answered complete but is not done")
        dup = conn.execute(
            text(
                "SELECT position_id, removed_at, COUNT(*) FROM lamp_removals "
                "GROUP BY position_id, removed_at HAVING COUNT(*) > 1"
            )
        ).all()
        if dup:
            problems.append(f"{len(dup)} duplicated removals (position, removed_at)")
        groups = conn.execute(
            text(
                "SELECT area_id, COUNT(*) FROM work_orders WHERE kind = 'group_relamp' "
                "AND state IN ('draft', 'issued', 'in_progress') GROUP BY area_id "
                "HAVING COUNT(*) > 1"
            )
        ).all()
        if groups:
            problems.append(f"{len(groups)} areas with more than one open group order")
    eng.dispose()
    return problems


def bench(
    label: str,
    url: str,
    clients: int,
    seconds: float,
    table: Table | None = None,
    rate: float | None = None,
) -> bool:
    """Prepare, serve, load and check one database; True when every check passed.

    rate: the total offered load in req/s (paced mode), None for the closed-loop run.
    """
    with tempfile.TemporaryDirectory() as tmp:
        env, key = prepare(url, Path(tmp))
        demo = load_demo_ids(url)
        port = free_port()
        proc = start_server(env, port)
        tally = Tally()
        try:
            until = time.monotonic() + seconds
            threads = [
                Client(
                    i,
                    f"http://127.0.0.1:{port}",
                    key,
                    demo,
                    tally,
                    until,
                    None if rate is None else rate / clients,
                )
                for i in range(clients)
            ]
            for t in threads:
                t.start()
            for t in threads:
                t.join()
        finally:
            proc.terminate()
            proc.wait(timeout=30)
        report(label, tally, seconds, rate)
        if table is not None:
            total = sum(len(v) for v in tally.latency.values())
            mode = "closed loop" if rate is None else f"paced {rate:g} req/s offered"
            every = np.concatenate([np.array(v) for v in tally.latency.values()])
            if every.size:
                table.add(
                    Row(
                        "-",
                        f"{label} all kinds, p99 of {every.size}, {mode}, {WORKERS} worker(s)",
                        float(np.percentile(every, 99)),
                        note=f"p50 {np.percentile(every, 50) * 1000:.0f} ms; "
                        f"{total / seconds:.1f} req/s answered",
                        target="p99 <= 250 ms on PostgreSQL" if rate is not None else "",
                    )
                )
            for kind in MIX:
                lat = np.array(tally.latency.get(kind, []))
                if lat.size:
                    table.add(
                        Row(
                            "-",
                            f"{label} {kind}, p50 of {lat.size}, {clients} clients, "
                            f"{mode}, {WORKERS} worker(s)",
                            float(np.percentile(lat, 50)),
                            note=f"p99 {np.percentile(lat, 99) * 1000:.0f} ms; "
                            f"all kinds {total / seconds:.0f} req/s",
                        )
                    )
        problems = check(url, tally)
        created = {k: len(v) for k, v in tally.created.items()}
        print(f"201 writes: {created}; completes: {len(tally.completed)}")
        bad_5xx = sum(
            n for c in tally.statuses.values() for s, n in c.items() if s >= 500 and s != 503
        )
        for p in problems:
            print("CHECK FAILED:", p)
        if bad_5xx:
            print(f"CHECK FAILED: {bad_5xx} answers 5xx other than 503")
        if not problems and not bad_5xx:
            print(
                "checks: every 201 stored, completes done, no duplicate removals, "
                "at most one open group order per area"
            )
        return not problems and not bad_5xx


def main() -> int:
    parser = table_parser(__doc__)
    parser.add_argument("--clients", type=int, default=50)
    parser.add_argument("--seconds", "--duration", type=float, default=60.0, dest="seconds")
    parser.add_argument("--workers", type=int, default=1, help="server worker processes")
    parser.add_argument("--db", default="sqlite,postgresql", help="sqlite, postgresql or both")
    parser.add_argument("--pg-url", default=DEFAULT_PG)
    parser.add_argument(
        "--mode", choices=("closed", "paced", "both"), default="closed", help="see above"
    )
    parser.add_argument(
        "--rate", default="20", help="paced mode: total offered req/s, comma-separated for several"
    )
    args = parser.parse_args()
    if args.quick:
        args.clients, args.seconds, args.db = 4, 3.0, "sqlite"
    global WORKERS
    WORKERS = args.workers
    rates: list[float | None] = [] if args.mode == "paced" else [None]
    if args.mode != "closed":
        rates += [float(r) for r in args.rate.split(",")]
    print(
        f"{args.clients} clients, {args.seconds:.0f} s, {WORKERS} worker(s); runs: "
        + "; ".join(mode_label(r) for r in rates)
    )
    table = Table("bench_load", args.quick)
    ok = True
    for db in args.db.split(","):
        if db == "sqlite" and WORKERS > 1:
            print("SQLite skipped: more than one worker needs PostgreSQL (lampkeeper serve)")
        elif db == "sqlite":
            for rate in rates:
                with tempfile.TemporaryDirectory() as tmp:
                    url = f"sqlite:///{Path(tmp) / 'bench.sqlite3'}"
                    ok &= bench("SQLite", url, args.clients, args.seconds, table, rate)
        elif db == "postgresql":
            ensure_database(args.pg_url)
            for rate in rates:
                ok &= bench("PostgreSQL", args.pg_url, args.clients, args.seconds, table, rate)
        else:
            parser.error(f"unknown database {db}")
    table.finish(args.json)
    return 0 if ok else 1


if __name__ == "__main__":
    sys.exit(main())
