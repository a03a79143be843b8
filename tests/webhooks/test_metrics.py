"""The feed and outbox gauges on /metrics: counted from the tables, as the scrape reads them."""

from __future__ import annotations

from datetime import timedelta

from fastapi.testclient import TestClient
from prometheus_client.parser import text_string_to_metric_families
from sqlalchemy.orm import Session

from service.db.base import utcnow
from service.register.models import Site
from service.webhooks.metrics import feed_lag, outbox
from service.webhooks.models import WebhookAttempt, WebhookDelivery, WebhookSubscription


def _subscription(db: Session) -> WebhookSubscription:
    sub = WebhookSubscription(url="https://receiver.example.test/hook", secret="s" * 32)
    db.add(sub)
    db.flush()
    return sub


def test_outbox_counts_states_ages_and_attempts(db: Session) -> None:
    sub = _subscription(db)
    now = utcnow()
    made = {"pending": 3, "delivered": 2, "failed": 1}
    change_id = 1
    for state, n in made.items():
        for _ in range(n):
            db.add(
                WebhookDelivery(
                    subscription_id=sub.id,
                    change_id=change_id,
                    payload={},
                    state=state,
                    next_attempt_at=now,
                    created_at=now - timedelta(minutes=change_id),  # the oldest: 6 min
                    window_started_at=now,
                )
            )
            change_id += 1
    db.flush()
    first = db.query(WebhookDelivery).order_by(WebhookDelivery.id).first()
    assert first is not None
    for outcome in ("delivered", "retry", "retry", "failed"):
        db.add(
            WebhookAttempt(
                delivery_id=first.id,
                subscription_id=sub.id,
                attempt_no=1,
                started_at=now,
                latency_ms=1.0,
                outcome=outcome,
            )
        )
    db.flush()
    states, pending_age, attempts = outbox(db)
    assert states == made
    # The pending rows were made 1, 2 and 3 minutes ago: the oldest is 180 s old.
    assert 180 <= pending_age < 180 + 60
    assert attempts == {"delivered": 1, "retry": 2, "failed": 1}


def test_feed_lag_is_zero_when_every_change_is_readable(db: Session) -> None:
    # Inside this test's own open transaction nothing else is writing; on PostgreSQL our own
    # uncommitted rows would wait, so measure before writing any.
    waiting, lag = feed_lag(db)
    assert lag >= 0 and waiting >= 0
    if db.get_bind().dialect.name == "sqlite":
        assert (waiting, lag) == (0, 0.0)


def test_feed_lag_counts_an_open_writers_changes(db: Session) -> None:
    if db.get_bind().dialect.name != "postgresql":
        return  # SQLite has one writer; a committed change is readable at once
    _subscription(db)  # not tracked; a site is
    db.add(
        Site(
            name="Lag test site",
            time_zone="UTC",
            nominal_voltage_v=230.0,
            currency="EUR",
            energy_price_per_kwh=0.2,
            labour_rate_per_h=40.0,
        )
    )
    db.flush()
    waiting, _ = feed_lag(db)
    assert waiting >= 1  # our own transaction is still running: its change must wait


def test_scrape_carries_the_feed_and_outbox_families(
    client: TestClient, reader: dict[str, str]
) -> None:
    text = client.get("/metrics", headers=reader).text
    names = {f.name for f in text_string_to_metric_families(text)}
    assert {
        "lampkeeper_change_feed_waiting",
        "lampkeeper_change_feed_lag_seconds",
        "lampkeeper_webhook_deliveries",
        "lampkeeper_webhook_oldest_pending_seconds",
        "lampkeeper_webhook_attempts",
    } <= names
