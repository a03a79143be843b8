"""Time demand, reorder and budget for the 100,000-fixture portfolio on PostgreSQL (issue 13).

Builds the weekly-run benchmark's invented portfolio (bench_weekly_run.load: 10 sites, 100,000
fixtures, 300,000 lamp positions) in a scratch database (default bench_demand_db), gives each
site a storeroom stocking every lamp type, then times D2: every storeroom's weekly demand
(26 weeks) and to-order list plus every site's 12-month budget, all from one portfolio load
and plan (stock.forecast.load_portfolio, as the portfolio budget computes it).
The anchor, in the same run: loading the same positions' ages (readings.ages), the database
read every one of those answers starts from.

Run: python benchmarks/bench_demand_db.py [URL] [--quick] [--repeats N] [--reuse]
(--reuse: time an earlier run's database again without rebuilding it). The medians of
D2's phases are printed after the table: the load and plan, the storerooms' demand, their
to-order lists, the budget.
"""

from __future__ import annotations

import statistics
import sys
import time
from pathlib import Path

import numpy as np
from sqlalchemy import insert, select
from sqlalchemy.orm import Session, sessionmaker

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))
sys.path.insert(0, str(Path(__file__).resolve().parent))

import bench_weekly_run as portfolio
from _table import Table, parser

from service.db.base import utcnow
from service.db.session import make_engine
from service.readings.ages import position_ages
from service.register.models import Site
from service.stock import budget
from service.stock.forecast import load_portfolio, storeroom_demand, to_order
from service.stock.models import StockBalance, Storeroom, StoreroomSite
from service.stock.service import balances
from service.workorders.repository import last_group_relamps

URL = "postgresql+psycopg://postgres@127.0.0.1:5432/bench_demand_db"


def stock(url: str, sites: list[int]) -> list[int]:
    """One storeroom per site stocking every lamp type; the storeroom ids."""
    engine = make_engine(url)
    with engine.begin() as c:
        rooms = [{"id": s, "name": f"Bench store {s}"} for s in sites]
        c.execute(insert(Storeroom), rooms)
        c.execute(insert(StoreroomSite), [{"site_id": s, "storeroom_id": s} for s in sites])
        c.execute(
            insert(StockBalance),
            [
                {"storeroom_id": s, "lamp_type_id": t + 1, "on_hand": 20, "reserved": 0}
                for s in sites
                for t in range(len(portfolio.TYPES))
            ],
        )
    engine.dispose()
    return sites


# Seconds of each phase of every D2 run (printed as medians after the table).
PHASES: dict[str, list[float]] = {"load + plans": [], "demand": [], "to-order": [], "budget": []}


def figure(factory: sessionmaker[Session], rooms: list[int]) -> object:
    """Every storeroom's demand and to-order list, every site's budget, from one load."""
    spent = dict.fromkeys(PHASES, 0.0)
    with factory() as s:
        t0 = time.perf_counter()
        sites = s.scalars(select(Site).where(Site.retired_at.is_(None)).order_by(Site.id)).all()
        loaded = load_portfolio(s, sites, utcnow(), last_group_relamps)
        spent["load + plans"] += time.perf_counter() - t0
        out: list[object] = []
        for r in rooms:
            t0 = time.perf_counter()
            sd = storeroom_demand(s, r, last_relamps=last_group_relamps, loaded=loaded)
            t1 = time.perf_counter()
            out.append(to_order(sd, balances(s, r), s))
            spent["demand"] += t1 - t0
            spent["to-order"] += time.perf_counter() - t1
        t0 = time.perf_counter()
        out.append(budget.portfolio(s, last_relamps=last_group_relamps, loaded=loaded))
        spent["budget"] += time.perf_counter() - t0
    for k, v in spent.items():
        PHASES[k].append(v)
    return out


def anchor(factory: sessionmaker[Session], sites: list[int]) -> object:
    """Every site's position ages: the read the figures start from."""
    with factory() as s:
        return [position_ages(s, site_id=i, active_only=True).size for i in sites]


def main() -> int:
    """Build, load, time."""
    ap = parser(__doc__, default_repeats=3)
    ap.add_argument("url", nargs="?", default=URL)
    ap.add_argument("--reuse", action="store_true", help="time an earlier run's database")
    args = ap.parse_args()
    if args.quick:
        portfolio.FIXTURES_PER_AREA = 10  # 10,000 fixtures
    if args.reuse:  # the database of an earlier run, as it was left
        sites = rooms = list(range(1, portfolio.N_SITES + 1))
    else:
        portfolio.rebuild(args.url)
        sites = portfolio.load(args.url, np.random.default_rng(7))
        rooms = stock(args.url, sites)
    engine = make_engine(args.url)
    factory = sessionmaker(bind=engine, expire_on_commit=False)
    n = len(sites) * portfolio.AREAS_PER_SITE * portfolio.FIXTURES_PER_AREA
    table = Table("bench_demand_db", args.quick)
    table.timed(
        "D2",
        f"demand + to-order + budget, {n:,} fixtures on PostgreSQL",
        lambda: figure(factory, rooms),
        anchor="position ages of the same sites",
        anchor_fn=lambda: anchor(factory, sites),
        repeats=1 if args.quick else args.repeats,
        warmup=0,
        target="" if args.quick else "<= 3 s (issue 13)",
    )
    engine.dispose()
    print("D2 phases, medians (s):", {k: round(statistics.median(v), 3) for k, v in PHASES.items()})
    table.finish(args.json)
    return 0


if __name__ == "__main__":
    sys.exit(main())
