"""Profile the overview page's server-side work on a database built by bench_web_pages.py.

bench_web_pages.py --profile profiles the test client's thread, which only waits while the
app's worker thread computes. This script calls the page function itself in this thread
(a real Session, a signed-in Visitor, a bare ASGI Request), so cProfile sees every step:
the site summaries, the portfolio plans, the spend, the chart and the template render.
It also times each step (wrapping the functions the page module calls) and the whole
request through the app, whose access log duration is the server time with middleware.

Run: python benchmarks/profile_overview.py postgresql+psycopg://postgres@127.0.0.1:5432/DB
[--repeats N] [--profile] [--top N]   (DB: a database built by bench_web_pages.py)
"""

from __future__ import annotations

import argparse
import cProfile
import gc
import os
import pstats
import statistics
import sys
import time
from collections.abc import Callable
from pathlib import Path
from typing import Any

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

PASSWORD = "bench-pages-2026"  # bench_web_pages.py's viewer


def _timed(laps: dict[str, list[float]], name: str, fn: Callable[..., Any]) -> Callable[..., Any]:
    """fn, recording each call's seconds under name."""

    def wrapper(*args: Any, **kwargs: Any) -> Any:
        t0 = time.perf_counter()
        try:
            return fn(*args, **kwargs)
        finally:
            laps.setdefault(name, []).append(time.perf_counter() - t0)

    return wrapper


def _request() -> Any:
    """A bare GET /app request (what the page function reads of it)."""
    from starlette.requests import Request

    scope = {
        "type": "http",
        "method": "GET",
        "path": "/app",
        "raw_path": b"/app",
        "query_string": b"",
        "headers": [],
        "scheme": "http",
        "server": ("testserver", 80),
        "client": ("127.0.0.1", 1),
    }
    return Request(scope)


def _wrap_steps(laps: dict[str, list[float]]) -> None:
    """Time every step the overview calls, by wrapping the names its modules look up."""
    from service.web import charts, queries
    from service.web import overview as content
    from service.web import router as web

    for owner, names in (
        (content, ("portfolio_plans", "spend_this_year")),
        (queries, ("site_summaries",)),
        (charts, ("weekly_burnouts",)),
        (web, ("page",)),
    ):
        for name in names:
            if hasattr(owner, name):
                setattr(owner, name, _timed(laps, name, getattr(owner, name)))


class GcClock:
    """Seconds spent in the garbage collector, by generation (gc.callbacks)."""

    def __init__(self) -> None:
        self.spent = [0.0, 0.0, 0.0]
        self.runs = [0, 0, 0]
        self._t0 = 0.0
        gc.callbacks.append(self._tick)

    def _tick(self, phase: str, info: dict[str, int]) -> None:
        if phase == "start":
            self._t0 = time.perf_counter()
        else:
            self.spent[info["generation"]] += time.perf_counter() - self._t0
            self.runs[info["generation"]] += 1

    def report(self, label: str) -> None:
        """Print and reset."""
        parts = ", ".join(f"gen{g} {self.runs[g]}x {self.spent[g]:.3f} s" for g in range(3))
        print(f"  gc during {label}: {parts}")
        self.spent, self.runs = [0.0, 0.0, 0.0], [0, 0, 0]


def _direct_call(url: str) -> tuple[Callable[[], int], str, Any]:
    """(a call of the page function on a fresh Session: its body size, the cookie, the app)."""
    from sqlalchemy.orm import Session

    from service.db.session import make_engine
    from service.main import create_app
    from service.users import service as users
    from service.web import router as web
    from service.web.auth import Visitor

    app = create_app(start_scheduler=False)  # before any freeze, as a server builds it
    engine = make_engine(url)
    with Session(engine) as s, s.begin():
        if users.repo.by_username(s, "bench") is None:
            users.create_user(s, "bench", "Bench Viewer", "viewer", PASSWORD)
        token = users.sign_in(s, "bench", PASSWORD, "127.0.0.1").token

    def direct() -> int:
        with Session(engine) as s:
            found = users.find_session(s, token)
            assert found is not None
            resp = web.overview(_request(), s, Visitor(user=found[1], row=found[0]))
            return len(resp.body)

    return direct, token, app


def _time_direct(direct: Callable[[], int], repeats: int, clock: GcClock) -> None:
    """Median wall and CPU seconds of direct calls, and of each step inside them."""
    laps: dict[str, list[float]] = {}
    _wrap_steps(laps)
    totals, cpu = [], []
    for _ in range(repeats):
        t0, c0 = time.perf_counter(), time.process_time()
        direct()
        totals.append(time.perf_counter() - t0)
        cpu.append(time.process_time() - c0)
    print(
        f"direct call: median {statistics.median(totals):.3f} s of {repeats}"
        f" (this process's CPU: median {statistics.median(cpu):.3f} s)"
    )
    clock.report(f"{repeats} direct calls")
    for name, times in laps.items():
        print(f"  {name:18s} median {statistics.median(times):.3f} s ({len(times)} calls)")


def _time_requests(app: Any, token: str, repeats: int, clock: GcClock) -> None:
    """Median seconds of GET /app through the app (middleware, session, auth included)."""
    from fastapi.testclient import TestClient

    with TestClient(app) as client:
        client.cookies.set("lk_session", token)
        client.get("/app")
        clock.report("the app's start and a warm-up request")
        http = []
        for _ in range(repeats):
            t0 = time.perf_counter()
            r = client.get("/app")
            http.append(time.perf_counter() - t0)
            assert r.status_code == 200, r.status_code
        clock.report(f"{repeats} requests")  # before the client's shutdown collects
    print(f"through the app: median {statistics.median(http):.3f} s of {repeats}")


def main() -> int:
    """Sign in, time direct calls and app requests, optionally print a cProfile."""
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("url", help="a database built by benchmarks/bench_web_pages.py")
    ap.add_argument("--repeats", type=int, default=3)
    ap.add_argument("--profile", action="store_true", help="print a cProfile of one call")
    ap.add_argument("--top", type=int, default=45)
    ap.add_argument("--no-freeze", action="store_true", help="direct calls without gc.freeze")
    args = ap.parse_args()
    os.environ["LAMPKEEPER_DATABASE_URL"] = args.url
    os.environ["LAMPKEEPER_SCHEDULER_ENABLED"] = "false"
    from service.heap import freeze_startup

    direct, token, app = _direct_call(args.url)
    print(f"page size: {direct():,} bytes")  # also the warm-up: imports, caches, a connection
    if not args.no_freeze:
        freeze_startup()  # as the app's start does (service.main.lifespan)
    clock = GcClock()
    _time_direct(direct, args.repeats, clock)
    _time_requests(app, token, args.repeats, clock)
    if args.profile:
        prof = cProfile.Profile()
        prof.enable()
        direct()
        prof.disable()
        stats = pstats.Stats(prof)
        stats.sort_stats("cumulative").print_stats(args.top)
        stats.sort_stats("tottime").print_stats(25)
    return 0


if __name__ == "__main__":
    sys.exit(main())
