"""Scrape-time gauges of the change feed and the webhook outbox, on the /metrics registry.

Read from the database when /metrics is scraped, so every worker process and replica
reports the same figures: the feed's lag (changes written but not yet readable below the
oldest running writer, and how long the oldest of them has waited) and the outbox (
deliveries by state, the oldest pending delivery's age, attempts by outcome).
"""

from __future__ import annotations

from collections.abc import Iterator

from prometheus_client.core import CounterMetricFamily, GaugeMetricFamily
from prometheus_client.registry import Collector
from sqlalchemy import func, literal_column, select
from sqlalchemy.exc import SQLAlchemyError
from sqlalchemy.orm import Session

from service.api.metrics import REGISTRY, SCRAPING_APP
from service.changes.models import Change
from service.changes.repository import PG_HORIZON
from service.db.base import utcnow
from service.db.session import short_session
from service.webhooks.models import DeliveryState, WebhookAttempt, WebhookDelivery

Metric = GaugeMetricFamily | CounterMetricFamily


def feed_lag(session: Session) -> tuple[int, float]:
    """Changes not yet readable and the age of the oldest of them (seconds; 0 when none)."""
    if session.get_bind().dialect.name != "postgresql":
        return 0, 0.0  # SQLite: one writer at a time, a committed change is readable at once
    waiting = Change.xact_id >= literal_column(PG_HORIZON)
    count, oldest = session.execute(
        select(func.count(), func.min(Change.changed_at)).where(waiting)
    ).one()
    age = (utcnow() - oldest).total_seconds() if oldest is not None else 0.0
    return int(count), max(age, 0.0)


def outbox(session: Session) -> tuple[dict[str, int], float, dict[str, int]]:
    """Deliveries by state, the oldest pending one's age (seconds), attempts by outcome."""
    states = {s.value: 0 for s in DeliveryState}
    for state, n in session.execute(
        select(WebhookDelivery.state, func.count()).group_by(WebhookDelivery.state)
    ):
        states[str(state)] = int(n)
    oldest = session.scalar(
        select(func.min(WebhookDelivery.created_at)).where(
            WebhookDelivery.state == DeliveryState.PENDING.value
        )
    )
    age = max((utcnow() - oldest).total_seconds(), 0.0) if oldest is not None else 0.0
    attempts = {
        str(outcome): int(n)
        for outcome, n in session.execute(
            select(WebhookAttempt.outcome, func.count()).group_by(WebhookAttempt.outcome)
        )
    }
    return states, age, attempts


class FeedCollector(Collector):
    """Feed lag and webhook outbox gauges; nothing (not an error) when the database is down."""

    def collect(self) -> Iterator[Metric]:
        """Read the figures in one short read-only session of the app."""
        try:
            with short_session(SCRAPING_APP.get(), write=False) as session:
                waiting, lag = feed_lag(session)
                states, pending_age, attempts = outbox(session)
        except SQLAlchemyError:
            return  # /metrics still answers; the pool gauges show the database trouble
        yield _gauge(
            "lampkeeper_change_feed_waiting", "Changes written but not yet readable.", waiting
        )
        yield _gauge(
            "lampkeeper_change_feed_lag_seconds",
            "Age of the oldest change not yet readable (seconds; 0 when none waits).",
            lag,
        )
        backlog = GaugeMetricFamily(
            "lampkeeper_webhook_deliveries", "Webhook deliveries by state.", labels=["state"]
        )
        for state, n in sorted(states.items()):
            backlog.add_metric([state], n)
        yield backlog
        yield _gauge(
            "lampkeeper_webhook_oldest_pending_seconds",
            "Age of the oldest pending webhook delivery (seconds; 0 when none).",
            pending_age,
        )
        tries = CounterMetricFamily(
            "lampkeeper_webhook_attempts",
            "Webhook POSTs made, by outcome (delivered, retry, failed).",
            labels=["outcome"],
        )
        for outcome, n in sorted(attempts.items()):
            tries.add_metric([outcome], n)
        yield tries


def _gauge(name: str, doc: str, value: float) -> GaugeMetricFamily:
    gauge = GaugeMetricFamily(name, doc)
    gauge.add_metric([], value)
    return gauge


_registered: list[FeedCollector] = []


def register_feed_metrics() -> None:
    """Add the collector to the /metrics registry once per process."""
    if not _registered:
        _registered.append(FeedCollector())
        REGISTRY.register(_registered[0])
