"""Webhook delivery throughput to a local receiver, beside bare signed POSTs (the anchor).

A scratch database (SQLite file by default, or a PostgreSQL URL) gets N site changes and
one subscription to an http.server receiver on loopback; the delivery worker then drains
the outbox (fan-out, claims, POSTs, attempt records). The anchor POSTs the same signed
bodies with the same kept httpx client and no database. Medians of the repeats.
Run: python benchmarks/bench_webhooks.py [URL] [N] [repeats]
"""

from __future__ import annotations

import statistics
import sys
import tempfile
import time
from pathlib import Path

import httpx

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))

from service.config import get_settings  # noqa: E402
from service.db.session import begin_write, make_engine, session_factory  # noqa: E402
from service.webhooks.schemas import SubscriptionCreate  # noqa: E402
from service.webhooks.service import create_subscription  # noqa: E402
from service.webhooks.signing import sign  # noqa: E402
from service.webhooks.worker import Deliverer  # noqa: E402
from tests.changes.live import drop_scratch, scratch_url  # noqa: E402
from tests.changes.slow_writer import site  # noqa: E402
from tests.webhooks.receiver import receiver  # noqa: E402

BASE = sys.argv[1] if len(sys.argv) > 1 else ""
N = int(sys.argv[2]) if len(sys.argv) > 2 else 2000
REPEATS = int(sys.argv[3]) if len(sys.argv) > 3 else 3


def one_round(tmp: Path, rep: int) -> tuple[float, float]:
    """(deliveries/s through the worker, bare signed POSTs/s) for N changes."""
    base = BASE or f"sqlite:///{tmp / 'base.sqlite3'}"
    url = scratch_url(base, tmp, f"bench_hooks_{rep}")
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
    return N / dt, N / dt_anchor


def main() -> None:
    """Repeat rounds; print medians."""
    with tempfile.TemporaryDirectory() as d, factory_silence():
        rounds = [one_round(Path(d), r) for r in range(REPEATS)]
    worker = statistics.median(r[0] for r in rounds)
    anchor = statistics.median(r[1] for r in rounds)
    db = "PostgreSQL" if BASE.startswith("postgresql") else "SQLite"
    print(f"webhook delivery, {N:,} changes to a loopback receiver, {db}, median of {REPEATS}:")
    print(f"  worker (fan-out, claim, POST, record): {worker:,.0f} deliveries/s")
    print(f"  anchor, bare signed POSTs, same client: {anchor:,.0f} POSTs/s")
    print(f"  worker / anchor: {worker / anchor:.2f}")


class factory_silence:  # noqa: N801 (a tiny context manager)
    """Keep the worker's per-pass log lines out of the figures."""

    def __enter__(self) -> None:
        import logging

        logging.getLogger("service.webhooks.worker").setLevel(logging.WARNING)

    def __exit__(self, *exc: object) -> None:
        return None


if __name__ == "__main__":
    main()
