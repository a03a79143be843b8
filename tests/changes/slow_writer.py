"""A writer in its own process: adds sites, then holds its transaction open until told.

Usage: python -m tests.changes.slow_writer URL NAME [NAME ...]; prints "wrote <name>" per
site (each flushed, so the transaction has its id), then waits for a line on stdin before
each next site and for the final commit.
"""

from __future__ import annotations

import sys

from sqlalchemy.orm import Session

from service.db.session import begin_write, make_engine
from service.register.models import Site


def site(name: str) -> Site:
    """An invented site."""
    return Site(
        name=name,
        time_zone="Europe/Lisbon",
        nominal_voltage_v=230.0,
        currency="EUR",
        energy_price_per_kwh=0.2,
        labour_rate_per_h=30.0,
    )


def main(url: str, names: list[str]) -> None:
    """Write each site after a go-ahead line, then commit after one more."""
    engine = make_engine(url)
    with Session(engine) as session:
        begin_write(session)
        for name in names:
            sys.stdin.readline()
            session.add(site(name))
            session.flush()
            print(f"wrote {name}", flush=True)
        sys.stdin.readline()
        session.commit()
        print("committed", flush=True)
    engine.dispose()


if __name__ == "__main__":
    main(sys.argv[1], sys.argv[2:])
