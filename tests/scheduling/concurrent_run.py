"""Helper process for the concurrency test: run one site's week at an agreed moment."""

from __future__ import annotations

import json
import sys

from sqlalchemy import text
from sqlalchemy.orm import sessionmaker

from service.db.session import make_engine
from service.scheduling.runner import run_site_week


def main() -> None:
    """argv: database URL, site id, ISO week. Says "ready", then runs when stdin says "go"."""
    url, site_id, week = sys.argv[1], int(sys.argv[2]), sys.argv[3]
    engine = make_engine(url)
    with engine.connect() as conn:  # connect before the barrier so both start together
        conn.execute(text("SELECT 1"))
    factory = sessionmaker(bind=engine, expire_on_commit=False)
    # A barrier the parent controls: slow start-up on a loaded machine cannot break it.
    print("ready", flush=True)
    if sys.stdin.readline().strip() != "go":
        sys.exit("no go signal")
    run = run_site_week(factory, site_id, week=week, trigger="api")
    print(json.dumps({"id": run.id, "outcome": run.outcome, "created": run.orders_created}))
    engine.dispose()


if __name__ == "__main__":
    main()
