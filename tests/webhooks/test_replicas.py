"""Two delivery replicas as two processes on one PostgreSQL database, one loopback receiver.

Each process runs the delivery worker (fan-out, FOR UPDATE SKIP LOCKED claims with a
lease, signed POSTs); both start at one signal on the same committed changes, so their
fan-outs and their small claims contend. Every event must arrive at
least once, signed as the README says, and no (event, attempt) pair may arrive twice: a
row claimed by one replica is never sent by the other in the same attempt. (The thread
version in test_delivery.py shares one interpreter; this one shares only the database.)
"""

from __future__ import annotations

import json
import os
import subprocess
import sys
import time
from collections import Counter
from pathlib import Path
from typing import Any

import pytest
from sqlalchemy import func, select
from sqlalchemy.orm import Session, sessionmaker

from service.webhooks.models import WebhookAttempt, WebhookDelivery
from tests.webhooks.receiver import Receiver
from tests.webhooks.test_delivery import add_sites
from tests.webhooks.test_signing import readme_verify

ROOT = Path(__file__).resolve().parents[2]
EVENTS = 60  # sites committed before the replicas start: both contend for every claim
BATCH = 2  # many small claims, so the two replicas' claim transactions overlap often


def start_replica(url: str, stop: Path) -> subprocess.Popen[str]:
    """A replica process, waited for until its engine is up; it starts on go()."""
    env = {
        **os.environ,
        "LAMPKEEPER_WEBHOOK_ALLOW_LOOPBACK": "true",
        "LAMPKEEPER_WEBHOOK_BATCH": str(BATCH),
    }
    proc = subprocess.Popen(
        [sys.executable, "-m", "tests.webhooks.replica", url, str(stop)],
        cwd=ROOT,
        env=env,
        stdin=subprocess.PIPE,
        stdout=subprocess.PIPE,
        text=True,
    )
    assert proc.stdout is not None and proc.stdout.readline().strip() == "ready"
    return proc


def go(proc: subprocess.Popen[str]) -> None:
    """Let a waiting replica start its passes."""
    assert proc.stdin is not None
    proc.stdin.write("go\n")
    proc.stdin.flush()


def finish(proc: subprocess.Popen[str]) -> dict[str, Any]:
    """The replica's closing stats line, once it has ended cleanly."""
    out, _ = proc.communicate(timeout=60)
    assert proc.returncode == 0
    stats: dict[str, Any] = json.loads(out.strip().splitlines()[-1])
    return stats


@pytest.mark.skipif(
    not (os.environ.get("TEST_DATABASE_URL") or "").startswith("postgresql"),
    reason="needs PostgreSQL (TEST_DATABASE_URL): SQLite has one writer at a time, so "
    "replica processes there only take turns and SKIP LOCKED claims are not exercised",
)
def test_two_replica_processes_deliver_each_event_once_per_attempt(
    live_url: str,
    live_factory: sessionmaker[Session],
    rec: Receiver,
    subscription: dict[str, Any],
    tmp_path: Path,
) -> None:
    for i in range(0, EVENTS, 10):  # several commits, each a batch of changes
        add_sites(live_factory, *[f"Replica Site {j}" for j in range(i, i + 10)])
    stop = tmp_path / "stop"
    procs = [start_replica(live_url, stop) for _ in range(2)]
    try:
        for p in procs:
            go(p)
        deadline = time.monotonic() + 120
        while len(rec.got) < EVENTS and time.monotonic() < deadline:
            time.sleep(0.1)
        time.sleep(1.0)  # room for a duplicate to arrive, if any would
    finally:
        stop.touch()
        stats = [finish(p) for p in procs]
    pairs = Counter(
        (r.headers["x-lampkeeper-event-id"], r.headers["x-lampkeeper-attempt"]) for r in rec.got
    )
    assert len({event for event, _ in pairs}) == EVENTS  # every event at least once
    assert max(pairs.values()) == 1  # never twice in one attempt
    verify = readme_verify()
    assert all(verify(subscription["secret"], r.headers, r.body) for r in rec.got)
    names = {json.loads(r.body)["change"]["body"]["name"] for r in rec.got}
    assert names == {f"Replica Site {j}" for j in range(EVENTS)}
    # Both processes took part, and between them claimed each delivery once.
    assert all(s["claimed"] > 0 for s in stats), stats
    assert sum(s["claimed"] for s in stats) == EVENTS, stats
    assert len({s["pid"] for s in stats}) == 2
    with live_factory() as s:
        sub_id = subscription["id"]
        outbox = s.scalar(select(func.count()).where(WebhookDelivery.subscription_id == sub_id))
        logged = s.scalars(
            select(WebhookAttempt.outcome).where(WebhookAttempt.subscription_id == sub_id)
        ).all()
    assert outbox == EVENTS  # fanned out once per change, whichever replica did it
    assert len(logged) == EVENTS and set(logged) == {"delivered"}
