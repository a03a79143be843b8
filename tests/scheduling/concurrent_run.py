"""Helper process for the concurrency test: run one site's week at an agreed moment."""

from __future__ import annotations

import json
import sys
import time

from sqlalchemy import text
from sqlalchemy.orm import sessionmaker

from service.db.session import make_engine
from service.scheduling.runner import run_site_week


def main() -> None:
    """argv: database URL, site id, ISO week, start time (epoch seconds)."""
    url, site_id, week, start_at = sys.argv[1], int(sys.argv[2]), sys.argv[3], float(sys.argv[4])
    engine = make_engine(url)
    with engine.connect() as conn:  # connect before the barrier so both start together
        conn.execute(text("SELECT 1"))
    factory = sessionmaker(bind=engine, expire_on_commit=False)
    while time.time() < start_at:
        time.sleep(0.0005)
    run = run_site_week(factory, site_id, week=week, trigger="api")
    print(json.dumps({"id": run.id, "outcome": run.outcome, "created": run.orders_created}))
    engine.dispose()


if __name__ == "__main__":
    main()
