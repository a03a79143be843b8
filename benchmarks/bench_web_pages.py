"""Time the portfolio overview and an area page for 100,000 fixtures on PostgreSQL.

Builds the weekly-run benchmark's portfolio (10 sites, 1,000 areas, 100,000 fixtures,
300,000 lamp positions, 3,000 open burnouts) in a scratch database (default: bench_web),
signs a viewer in through the app, and times each page (median of repeats, in-process
through the ASGI app: server time without a network). Anchors measured in the same run:
the API calls that compute the same plans and forecast (every site's relamp plan; the
area's relamp plan and forecast) and a bare SQL count of the fixtures.

Run: python benchmarks/bench_web_pages.py [postgresql+psycopg://postgres@127.0.0.1:5432/bench_web]
Add --profile to print the top of a cProfile of one overview (--profile-only: just that),
--reuse to time an earlier run's database again without rebuilding it.
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

import numpy as np
from sqlalchemy import func, select
from sqlalchemy.orm import Session

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))
sys.path.insert(0, str(Path(__file__).resolve().parent))

from bench_weekly_run import load, rebuild  # the same invented portfolio

ARGS = [a for a in sys.argv[1:] if not a.startswith("--")]
URL = ARGS[0] if ARGS else "postgresql+psycopg://postgres@127.0.0.1:5432/bench_web"
REPEATS = 5
PASSWORD = "bench-pages-2026"


def median_s(call: Callable[[], object], repeats: int = REPEATS) -> float:
    """Median seconds of `repeats` calls after one warm-up call."""
    call()
    times = []
    for _ in range(repeats):
        t0 = time.perf_counter()
        call()
        times.append(time.perf_counter() - t0)
    return statistics.median(times)


def main() -> None:  # noqa: PLR0915  (a benchmark script, one sequence of steps)
    """Build, load, sign in, time pages beside their anchors, print the figures."""
    t0 = time.perf_counter()
    if "--reuse" in sys.argv:  # the database of an earlier run, as it was left
        sites = list(range(1, 11))
    else:
        rebuild(URL)
        sites = load(URL, np.random.default_rng(20261203))
        print(f"load: {time.perf_counter() - t0:.1f} s")
    os.environ["LAMPKEEPER_DATABASE_URL"] = URL
    os.environ["LAMPKEEPER_SCHEDULER_ENABLED"] = "false"
    from fastapi.testclient import TestClient

    from service.config import get_settings
    from service.db.session import make_engine
    from service.keys.service import create_key
    from service.register.models import Area, Fixture
    from service.users import service as users

    get_settings.cache_clear()
    engine = make_engine(URL)
    with Session(engine) as s, s.begin():
        if users.repo.by_username(s, "bench") is None:
            users.create_user(s, "bench", "Bench Viewer", "viewer", PASSWORD)
        _, key = create_key(s, f"bench-{time.time_ns()}", "read")
        area_id = int(s.scalar(select(func.min(Area.id))) or 1)

    def sql_count() -> None:
        with Session(engine) as s:
            s.scalar(select(func.count()).select_from(Fixture))

    from service.main import create_app

    with TestClient(create_app(start_scheduler=False)) as client:
        r = client.post("/sign-in", data={"username": "bench", "password": PASSWORD})
        assert r.status_code == 200 and "Portfolio overview" in r.text, r.status_code
        api = {"Authorization": f"Bearer {key}"}

        def get(url: str, headers: dict[str, str] | None = None) -> Callable[[], None]:
            def call() -> None:
                resp = client.get(url, headers=headers)
                assert resp.status_code == 200, (url, resp.status_code, resp.text[:300])

            return call

        def all_site_plans() -> None:
            for site in sites:
                get(f"/api/v1/sites/{site}/relamp-plan", api)()

        def area_api() -> None:
            get(f"/api/v1/areas/{area_id}/relamp-plan", api)()
            get(f"/api/v1/forecasts/areas/{area_id}", api)()

        if "--profile-only" in sys.argv:
            prof = cProfile.Profile()
            prof.enable()
            get("/app")()
            prof.disable()
            pstats.Stats(prof).sort_stats("cumulative").print_stats(45)
            return
        count = median_s(sql_count)
        overview = median_s(get("/app"))
        plans = median_s(all_site_plans)
        area = median_s(get(f"/app/areas/{area_id}"))
        area_anchor = median_s(area_api)
        print(f"bare SQL count(*) of 100,000 fixtures: {count * 1000:.1f} ms")
        print(
            f"overview /app: {overview:.3f} s (median of {REPEATS}); anchor, every site's "
            f"relamp plan through the API: {plans:.3f} s; ratio {overview / plans:.2f}; "
            f"{overview / count:.0f}x the count"
        )
        print(
            f"area page /app/areas/{area_id}: {area:.3f} s; anchor, the area's relamp plan and "
            f"forecast through the API: {area_anchor:.3f} s; ratio {area / area_anchor:.2f}"
        )
        print(
            f"target <= 1 s each: overview {'met' if overview <= 1 else 'MISSED'}, "
            f"area {'met' if area <= 1 else 'MISSED'}"
        )
        if "--profile" in sys.argv:
            prof = cProfile.Profile()
            prof.enable()
            get("/app")()
            prof.disable()
            pstats.Stats(prof).sort_stats("cumulative").print_stats(35)
    engine.dispose()


if __name__ == "__main__":
    main()
