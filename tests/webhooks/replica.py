"""A delivery replica in its own process: runs worker passes until told to stop.

Usage: python -m tests.webhooks.replica URL STOP_FILE; prints "ready" once its engine is
up, waits for a line on stdin (so two replicas start together), then runs Deliverer passes (fan-out, claim, POST, record) until STOP_FILE exists and
a pass claims nothing, and prints one JSON line: {"pid", "passes", "claimed", "outcomes"}.
Settings come from the environment (LAMPKEEPER_WEBHOOK_ALLOW_LOOPBACK, _BATCH, ...).
"""

from __future__ import annotations

import json
import os
import sys
import time
from pathlib import Path

from sqlalchemy.orm import sessionmaker

from service.db.session import make_engine
from service.webhooks.worker import Deliverer


def main(url: str, stop_file: Path) -> None:
    """Deliver until the stop file appears and the outbox has nothing due for us."""
    engine = make_engine(url)
    factory = sessionmaker(bind=engine, expire_on_commit=False, autoflush=False)
    worker = Deliverer(factory)
    passes, claimed = 0, 0
    outcomes: dict[str, int] = {}
    print("ready", flush=True)
    sys.stdin.readline()
    try:
        while True:
            stats = worker.run_pass()
            passes += 1
            claimed += stats.claimed
            for k, v in stats.outcomes.items():
                outcomes[k] = outcomes.get(k, 0) + v
            if stats.claimed == 0:
                if stop_file.exists():
                    break
                time.sleep(0.05)  # a replica's poll interval, short for the test
    finally:
        worker.close()
        engine.dispose()
    print(
        json.dumps(
            {"pid": os.getpid(), "passes": passes, "claimed": claimed, "outcomes": outcomes}
        ),
        flush=True,
    )


if __name__ == "__main__":
    main(sys.argv[1], Path(sys.argv[2]))
