"""Prometheus metrics (prometheus-client) on a registry of our own, served at /metrics.

Request count and latency by route template (never the raw path, so ids do not explode
the label set) and status; weekly runs by outcome with their duration and orders made;
the database pool (size, checked out, overflow) read when scraped. /metrics needs a read
key unless ``metrics_public`` is set.
"""

from __future__ import annotations

from collections.abc import Iterator
from contextvars import ContextVar
from typing import Any

from fastapi import Depends, FastAPI, Request
from fastapi.responses import Response
from prometheus_client import CONTENT_TYPE_LATEST, CollectorRegistry, Counter, Histogram
from prometheus_client.core import GaugeMetricFamily
from prometheus_client.exposition import generate_latest
from prometheus_client.registry import Collector

from service.config import get_settings

REGISTRY = CollectorRegistry(auto_describe=True)
# The app being scraped, for collectors that read the database through its sessions.
SCRAPING_APP: ContextVar[Any] = ContextVar("scraping_app", default=None)

# Seconds; from 5 ms (a keyed read) to 60 s (a large upload or a whole-site forecast).
LATENCY_BUCKETS = (0.005, 0.01, 0.025, 0.05, 0.1, 0.25, 0.5, 1.0, 2.5, 5.0, 10.0, 30.0, 60.0)
# Seconds; a weekly run of a small site takes well under a second, 100,000 fixtures minutes.
RUN_BUCKETS = (0.1, 0.5, 1.0, 5.0, 15.0, 30.0, 60.0, 120.0, 300.0, 600.0, 1800.0)

REQUESTS = Counter(
    "lampkeeper_http_requests",
    "HTTP requests answered, by method, route template and status.",
    ("method", "route", "status"),
    registry=REGISTRY,
)
LATENCY = Histogram(
    "lampkeeper_http_request_duration_seconds",
    "Time from the request's arrival to the end of its answer (seconds).",
    ("method", "route", "status"),
    buckets=LATENCY_BUCKETS,
    registry=REGISTRY,
)
RUNS = Counter(
    "lampkeeper_weekly_runs",
    "Weekly relamping runs finished, by outcome (succeeded, failed).",
    ("outcome",),
    registry=REGISTRY,
)
RUN_DURATION = Histogram(
    "lampkeeper_weekly_run_duration_seconds",
    "Wall time of a weekly run from its record to its outcome (seconds).",
    ("outcome",),
    buckets=RUN_BUCKETS,
    registry=REGISTRY,
)
RUN_ORDERS = Counter(
    "lampkeeper_weekly_run_orders_created",
    "Work orders created by weekly runs.",
    registry=REGISTRY,
)


class PoolCollector(Collector):
    """The process engine's connection pool, read at scrape time."""

    def collect(self) -> Iterator[GaugeMetricFamily]:
        """Gauges of the pool's size, checked-out connections and overflow."""
        from service.db.session import get_engine

        pool: Any = get_engine().pool
        values = {}
        for name in ("size", "checkedout", "overflow", "checkedin"):
            method = getattr(pool, name, None)
            if callable(method):
                values[name] = float(method())
        helps = {
            "size": "Connections the pool keeps open.",
            "checkedout": "Connections in use by a request or job.",
            "overflow": "Connections beyond the pool size (negative: not yet opened).",
            "checkedin": "Idle connections in the pool.",
        }
        for name, value in values.items():
            gauge = GaugeMetricFamily(f"lampkeeper_db_pool_{name}", helps[name])
            gauge.add_metric([], value)
            yield gauge


REGISTRY.register(PoolCollector())


def observe_request(method: str, route: str, status: int, seconds: float) -> None:
    """Count one answered request and its latency."""
    labels = (method, route, str(status))
    REQUESTS.labels(*labels).inc()
    LATENCY.labels(*labels).observe(seconds)


def observe_run(outcome: str, seconds: float, orders_created: int = 0) -> None:
    """Count one finished weekly run, its duration and the orders it made."""
    RUNS.labels(outcome).inc()
    RUN_DURATION.labels(outcome).observe(seconds)
    if orders_created:
        RUN_ORDERS.inc(orders_created)


def install_metrics(app: FastAPI) -> None:
    """Add GET /metrics: open when metrics_public is set, else behind a read key."""
    from service.api.auth import require

    guard = [] if get_settings().metrics_public else [Depends(require("read"))]

    @app.get("/metrics", include_in_schema=False, dependencies=guard)
    def metrics(request: Request) -> Response:
        token = SCRAPING_APP.set(request.app)
        try:
            body = generate_latest(REGISTRY)
        finally:
            SCRAPING_APP.reset(token)
        return Response(body, media_type=CONTENT_TYPE_LATEST)
