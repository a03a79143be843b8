"""Time the portfolio overview and an area page for 100,000 fixtures on PostgreSQL.

Builds the weekly-run benchmark's portfolio (10 sites, 1,000 areas, 100,000 fixtures,
300,000 lamp positions, 3,000 open burnouts) in a scratch database (default: bench_web),
signs a viewer in through the app, and times each page (median of repeats, in-process
through the ASGI app: server time without a network). Anchors measured in the same run:
the API calls that compute the same plans and forecast (every site's relamp plan; the
area's relamp plan and forecast) and a bare SQL count of the fixtures.

Rows G1 (overview) and G2 (area page), target at most 1 s each; G3a-d the overview's phases
(position ages, the rest of the portfolio plans, the weekly burnout chart, this year's
spend), each beside the whole overview's server-side work measured in the same loop; G4
one site's relamp plan through the API (target at most 0.4 s) beside its plans without a body.
Run: python benchmarks/bench_web_pages.py [postgresql+psycopg://postgres@127.0.0.1:5432/bench_web]
[--repeats N] [--quick] [--json PATH]. Add --profile to print the top of a cProfile of one
overview (--profile-only: just that), --reuse to time an earlier run's database again
without rebuilding it; --quick: 2 sites x 5 areas x 10 fixtures, one repeat.
"""

from __future__ import annotations

import cProfile
import os
import pstats
import statistics
import sys
import time
from collections.abc import Callable
from pathlib import Path
from typing import Any

import numpy as np
from sqlalchemy import func, select
from sqlalchemy.orm import Session

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))
sys.path.insert(0, str(Path(__file__).resolve().parent))

import bench_weekly_run as weekly  # the same invented portfolio
from _table import Row, Table, parser

URL = "postgresql+psycopg://postgres@127.0.0.1:5432/bench_web"
PASSWORD = "bench-pages-2026"


def median_s(call: Callable[[], object], repeats: int) -> float:
    """Median seconds of `repeats` calls after one warm-up call."""
    call()
    times = []
    for _ in range(repeats):
        t0 = time.perf_counter()
        call()
        times.append(time.perf_counter() - t0)
    return statistics.median(times)


def build(url: str, quick: bool, reuse: bool) -> list[int]:
    """Load the portfolio (small in quick mode) unless reusing an earlier run's; site ids."""
    if quick:  # 2 sites x 5 areas x 10 fixtures
        weekly.N_SITES, weekly.AREAS_PER_SITE, weekly.FIXTURES_PER_AREA = 2, 5, 10
        n_fix = weekly.N_SITES * weekly.AREAS_PER_SITE * weekly.FIXTURES_PER_AREA
        weekly.OPEN_REPORTS = n_fix * weekly.LAMPS_PER_FIXTURE // 100
    if reuse:  # the database of an earlier run, as it was left
        return list(range(1, weekly.N_SITES + 1))
    t0 = time.perf_counter()
    weekly.rebuild(url)
    sites = weekly.load(url, np.random.default_rng(20261203))
    print(f"load: {time.perf_counter() - t0:.1f} s")
    return sites


def main() -> int:
    """Build, load, sign in, time pages beside their anchors; table rows G1, G2."""
    ap = parser(__doc__, default_repeats=5)
    ap.add_argument("url", nargs="?", default=URL, help="scratch PostgreSQL database")
    ap.add_argument("--reuse", action="store_true", help="time an earlier run's database")
    ap.add_argument("--profile", action="store_true", help="also profile one overview")
    ap.add_argument("--profile-only", action="store_true", help="only profile one overview")
    args = ap.parse_args()
    repeats = 1 if args.quick else args.repeats
    sites = build(args.url, args.quick, args.reuse)
    os.environ["LAMPKEEPER_DATABASE_URL"] = args.url
    os.environ["LAMPKEEPER_SCHEDULER_ENABLED"] = "false"
    from fastapi.testclient import TestClient

    from service.config import get_settings
    from service.db.session import get_engine, make_engine
    from service.keys.service import create_key
    from service.main import create_app
    from service.register.models import Area, Fixture
    from service.users import service as users

    get_settings.cache_clear()  # the loader's imports read the settings before URL was set
    get_engine.cache_clear()
    engine = make_engine(args.url)
    with Session(engine) as s, s.begin():
        if users.repo.by_username(s, "bench") is None:
            users.create_user(s, "bench", "Bench Viewer", "viewer", PASSWORD)
        _, key = create_key(s, f"bench-{time.time_ns()}", "read")
        area_id = int(s.scalar(select(func.min(Area.id))) or 1)
        n_fix = int(s.scalar(select(func.count()).select_from(Fixture)) or 0)

    def sql_count() -> None:
        with Session(engine) as s:
            s.scalar(select(func.count()).select_from(Fixture))

    table = Table("bench_web_pages", args.quick)
    with TestClient(create_app(start_scheduler=False)) as client:
        r = client.post("/sign-in", data={"username": "bench", "password": PASSWORD})
        assert r.status_code == 200 and "Portfolio overview" in r.text, r.status_code
        api = {"Authorization": f"Bearer {key}"}
        if args.profile_only:
            profile(get(client, "/app"))
            return 0
        time_pages(table, client, api, sites, area_id, n_fix, median_s(sql_count, repeats), repeats)
        time_phases(table, engine, repeats)
        time_one_site(table, client, api, engine, sites[0], repeats)
        if args.profile:
            profile(get(client, "/app"))
    engine.dispose()
    table.finish(args.json)
    return 0


def get(client: Any, url: str, headers: dict[str, str] | None = None) -> Callable[[], None]:
    """A call that GETs a URL and checks it answered 200."""

    def call() -> None:
        resp = client.get(url, headers=headers)
        assert resp.status_code == 200, (url, resp.status_code, resp.text[:300])

    return call


def time_pages(
    table: Table,
    client: Any,
    api: dict[str, str],
    sites: list[int],
    area_id: int,
    n_fix: int,
    count_s: float,
    repeats: int,
) -> None:
    """G1 the overview beside every site's plan through the API; G2 an area page likewise."""

    def all_site_plans() -> None:
        for site in sites:
            get(client, f"/api/v1/sites/{site}/relamp-plan", api)()

    def area_api() -> None:
        get(client, f"/api/v1/areas/{area_id}/relamp-plan", api)()
        get(client, f"/api/v1/forecasts/areas/{area_id}", api)()

    overview = median_s(get(client, "/app"), repeats)
    plans = median_s(all_site_plans, repeats)
    area = median_s(get(client, f"/app/areas/{area_id}"), repeats)
    area_anchor = median_s(area_api, repeats)
    table.add(
        Row(
            "G1",
            f"overview /app, {n_fix:,} fixtures",
            overview,
            "every site's relamp plan, API (no page)",
            plans,
            repeats,
            "<= 1 s",
            f"{overview / count_s:.0f}x a bare SQL count(*) of the fixtures ({count_s * 1e3:.1f} ms)",
        )
    )
    table.add(
        Row(
            "G2",
            f"area page /app/areas/{area_id}",
            area,
            "the area's relamp plan + forecast, API",
            area_anchor,
            repeats,
            "<= 1 s",
        )
    )


def time_phases(table: Table, engine: Any, repeats: int) -> None:
    """G3a-d: the overview's phases on one session, each repeat timing every phase once."""
    from service.db.base import utcnow
    from service.planning import portfolio
    from service.readings.ages import position_ages
    from service.web import charts, queries
    from service.workorders.repository import last_group_relamps
    from service.workorders.spend import spend_this_year

    laps: dict[str, list[float]] = {"ages": [], "plans": [], "chart": [], "spend": []}
    for i in range(repeats + 1):  # the first is a warm-up
        with Session(engine) as s:
            now = utcnow()
            sites = queries.sites(s)
            t0 = time.perf_counter()
            position_ages(s, at=now, active_only=True)
            t1 = time.perf_counter()
            pf = portfolio.portfolio_plans(s, sites, now, last_relamps=last_group_relamps)
            t2 = time.perf_counter()
            due = [p.due_on for p in pf.plans if p.due_on]
            charts.weekly_burnouts(s, now, due, now.date(), loaded=(pf.ages, pf.types))
            t3 = time.perf_counter()
            spend_this_year(s, sites, pf.plans, now)
            t4 = time.perf_counter()
        if i:
            laps["ages"].append(t1 - t0)
            laps["plans"].append((t2 - t1) - (t1 - t0))  # portfolio_plans loads ages itself
            laps["chart"].append(t3 - t2)
            laps["spend"].append(t4 - t3)
    whole = statistics.median([sum(v[i] for v in laps.values()) for i in range(repeats)])
    names = {
        "ages": "G3a phase: position ages (readings.ages)",
        "plans": "G3b phase: portfolio plans without the ages",
        "chart": "G3c phase: weekly burnout chart",
        "spend": "G3d phase: this year's spend",
    }
    for key, label in names.items():
        table.add(
            Row(
                label.split()[0],
                label.split(" ", 1)[1],
                statistics.median(laps[key]),
                "the four phases together",
                whole,
                repeats,
            )
        )


def time_one_site(
    table: Table, client: Any, api: dict[str, str], engine: Any, site_id: int, repeats: int
) -> None:
    """G4: one site's relamp plan through the API beside the same plans without a body."""
    from service.planning import service as planning
    from service.register.models import Site
    from service.workorders.repository import last_group_relamps

    def plans_only() -> None:
        with Session(engine) as s:
            site = s.get(Site, site_id)
            planning.site_plans(s, site, last_relamps=last_group_relamps)

    api_s = median_s(get(client, f"/api/v1/sites/{site_id}/relamp-plan", api), repeats)
    table.add(
        Row(
            "G4",
            f"one site's relamp plan, API /sites/{site_id}/relamp-plan",
            api_s,
            "the same site's plans in-process, no body",
            median_s(plans_only, repeats),
            repeats,
            "<= 0.4 s",
        )
    )


def profile(call: Callable[[], None]) -> None:
    """Print the top of a cProfile of one call."""
    prof = cProfile.Profile()
    prof.enable()
    call()
    prof.disable()
    pstats.Stats(prof).sort_stats("cumulative").print_stats(40)


if __name__ == "__main__":
    sys.exit(main())
