"""Webhook delivery: fan changes out into the outbox, claim due rows, POST, record.

A pass (run_pass) is three kinds of short transaction, none held across an HTTP call:
1. fan-out: each active subscription (row-locked, SKIP LOCKED on PostgreSQL) takes the
   visible changes after its cursor into its outbox and advances the cursor;
2. claim: due rows are leased to this worker (FOR UPDATE SKIP LOCKED on PostgreSQL,
   BEGIN IMMEDIATE on SQLite), so two replicas never hold one row at once;
3. per delivery: the POST, then its attempt logged and the row marked delivered, or
   rescheduled with exponential back-off and jitter, or failed after webhook_give_up_s
   (the subscription is then paused). A worker that dies mid-POST leaves its lease to
   expire; the row is claimed again (at-least-once).
"""

from __future__ import annotations

import json
import logging
import os
import random
import socket
import time
import uuid
from dataclasses import dataclass, field
from datetime import datetime, timedelta
from typing import Any

import httpx
from sqlalchemy import insert, or_, select, update
from sqlalchemy.orm import Session, sessionmaker

from service.changes import repository as changes_repository
from service.changes.service import to_read
from service.config import get_settings
from service.db.base import utcnow
from service.db.session import begin_write
from service.webhooks.models import (
    DeliveryState,
    SubscriptionState,
    WebhookAttempt,
    WebhookDelivery,
    WebhookSubscription,
)
from service.webhooks.signing import (
    ATTEMPT_HEADER,
    EVENT_HEADER,
    SIGNATURE_HEADER,
    TIMESTAMP_HEADER,
    sign,
)
from service.webhooks.targets import TargetRefused, check_target

log = logging.getLogger(__name__)

FAN_OUT_LIMIT = 1000  # changes taken per subscription per pass


def _pg(session: Session) -> bool:
    return session.get_bind().dialect.name == "postgresql"


def payload_of(change: Any) -> dict[str, Any]:
    """The JSON body of a change's delivery: event id, type and the change itself."""
    read = to_read(change)
    return {
        "event_id": str(change.id),
        "type": f"{change.resource_type}.{change.kind}",
        "change": read.model_dump(mode="json"),
    }


def fan_out(session: Session, now: datetime | None = None) -> int:
    """Copy the visible changes after each active subscription's cursor into its outbox."""
    when = now or utcnow()
    stmt = (
        select(WebhookSubscription)
        .where(WebhookSubscription.state == SubscriptionState.ACTIVE.value)
        .order_by(WebhookSubscription.id)
    )
    if _pg(session):
        stmt = stmt.with_for_update(skip_locked=True)
    total = 0
    for sub in session.scalars(stmt).all():
        rows = changes_repository.read_after(
            session, (sub.cursor_xact, sub.cursor_id), FAN_OUT_LIMIT
        )
        if not rows:
            continue
        wanted = set(sub.types) if sub.types else None
        values = [
            {
                "subscription_id": sub.id,
                "change_id": c.id,
                "payload": payload_of(c),
                "state": DeliveryState.PENDING.value,
                "attempts": 0,
                "next_attempt_at": when,
                "window_started_at": when,
                "created_at": when,
            }
            for c in rows
            if wanted is None or c.resource_type in wanted
        ]
        if values:
            session.execute(insert(WebhookDelivery), values)
        # Core UPDATE: moving the cursor is not an edit of the subscription (no version bump).
        session.execute(
            update(WebhookSubscription)
            .where(WebhookSubscription.id == sub.id)
            .values(cursor_xact=rows[-1].xact_id, cursor_id=rows[-1].id)
        )
        total += len(values)
    session.flush()
    return total


@dataclass(frozen=True)
class Claimed:
    """A delivery leased to this worker, with what the POST needs."""

    id: int
    subscription_id: int
    change_id: int
    url: str
    secret: str
    payload: dict[str, Any]
    attempts: int
    window_started_at: datetime


def claim(session: Session, owner: str, now: datetime, batch: int, lease_s: float) -> list[Claimed]:
    """Lease up to `batch` due deliveries of active subscriptions to `owner`."""
    stmt = (
        select(WebhookDelivery.id)
        .join(WebhookSubscription, WebhookSubscription.id == WebhookDelivery.subscription_id)
        .where(
            WebhookDelivery.state == DeliveryState.PENDING.value,
            WebhookDelivery.next_attempt_at <= now,
            or_(WebhookDelivery.lease_expires_at.is_(None), WebhookDelivery.lease_expires_at < now),
            WebhookSubscription.state == SubscriptionState.ACTIVE.value,
        )
        .order_by(WebhookDelivery.next_attempt_at, WebhookDelivery.id)
        .limit(batch)
    )
    if _pg(session):
        stmt = stmt.with_for_update(skip_locked=True, of=WebhookDelivery)
    ids = list(session.scalars(stmt))
    if not ids:
        return []
    session.execute(
        update(WebhookDelivery)
        .where(WebhookDelivery.id.in_(ids))
        .values(lease_expires_at=now + timedelta(seconds=lease_s), lease_owner=owner)
    )
    rows = session.execute(
        select(WebhookDelivery, WebhookSubscription.url, WebhookSubscription.secret)
        .join(WebhookSubscription, WebhookSubscription.id == WebhookDelivery.subscription_id)
        .where(WebhookDelivery.id.in_(ids))
        .order_by(WebhookDelivery.id)
    ).all()
    return [
        Claimed(
            d.id,
            d.subscription_id,
            d.change_id,
            url,
            secret,
            d.payload,
            d.attempts,
            d.window_started_at,
        )
        for d, url, secret in rows
    ]


@dataclass(frozen=True)
class Result:
    """What one POST gave: a status, or an error, and how long it took."""

    status: int | None
    error: str | None
    latency_ms: float

    @property
    def ok(self) -> bool:
        """A 2xx answer."""
        return self.status is not None and 200 <= self.status < 300


def body_of(payload: dict[str, Any]) -> bytes:
    """The exact bytes POSTed (and signed)."""
    return json.dumps(payload, separators=(",", ":"), sort_keys=True).encode()


def post(client: httpx.Client, item: Claimed, timestamp: int | None = None) -> Result:
    """POST one signed delivery; never raises for the receiver's faults."""
    start = time.perf_counter()
    try:
        check_target(item.url)  # again at send time: DNS may have changed since creation
        body = body_of(item.payload)
        ts = int(time.time()) if timestamp is None else timestamp
        headers = {
            "Content-Type": "application/json",
            "User-Agent": "LampKeeper-Webhooks/1",
            EVENT_HEADER: str(item.change_id),
            TIMESTAMP_HEADER: str(ts),
            SIGNATURE_HEADER: sign(item.secret, ts, body),
            ATTEMPT_HEADER: str(item.attempts + 1),
        }
        resp = client.post(item.url, content=body, headers=headers)
        err = None if 200 <= resp.status_code < 300 else f"HTTP {resp.status_code}"
        return Result(resp.status_code, err, (time.perf_counter() - start) * 1000)
    except TargetRefused as exc:
        return Result(None, f"target refused: {exc}", (time.perf_counter() - start) * 1000)
    except httpx.HTTPError as exc:
        kind = type(exc).__name__
        return Result(None, f"{kind}: {exc}"[:500], (time.perf_counter() - start) * 1000)


def backoff_s(attempt_no: int, rng: random.Random | None = None) -> float:
    """Seconds before the next try after `attempt_no` failures: capped doubling, 50-100%."""
    s = get_settings()
    base = min(s.webhook_retry_cap_s, s.webhook_retry_base_s * 2.0 ** min(attempt_no - 1, 40))
    return base * (0.5 + 0.5 * (rng or random).random())  # jitter spreads retry storms


def record(
    session: Session,
    item: Claimed,
    owner: str,
    result: Result,
    now: datetime,
    rng: random.Random | None = None,
) -> str:
    """Log the attempt and move the delivery on; the outcome (delivered, retry, failed)."""
    attempt_no = item.attempts + 1
    give_up = get_settings().webhook_give_up_s
    if result.ok:
        outcome = "delivered"
        values: dict[str, Any] = {
            "state": DeliveryState.DELIVERED.value,
            "delivered_at": now,
        }
    elif (now - item.window_started_at).total_seconds() >= give_up:
        outcome = "failed"
        values = {"state": DeliveryState.FAILED.value}
    else:
        outcome = "retry"
        values = {"next_attempt_at": now + timedelta(seconds=backoff_s(attempt_no, rng))}
    session.add(
        WebhookAttempt(
            delivery_id=item.id,
            subscription_id=item.subscription_id,
            attempt_no=attempt_no,
            started_at=now,
            status_code=result.status,
            latency_ms=result.latency_ms,
            error=result.error,
            outcome=outcome,
        )
    )
    done = session.execute(
        update(WebhookDelivery)
        .where(WebhookDelivery.id == item.id, WebhookDelivery.lease_owner == owner)
        .values(
            attempts=attempt_no,
            last_status=result.status,
            last_error=result.error,
            lease_expires_at=None,
            lease_owner=None,
            **values,
        )
    )
    if not done.rowcount:  # type: ignore[attr-defined]
        log.warning("delivery %s: lease lost before the result was recorded", item.id)
    if outcome == "failed":
        session.execute(
            update(WebhookSubscription)
            .where(
                WebhookSubscription.id == item.subscription_id,
                WebhookSubscription.state == SubscriptionState.ACTIVE.value,
            )
            .values(
                state=SubscriptionState.PAUSED.value,
                paused_at=now,
                paused_reason=f"delivery {item.id} failed for {give_up:.0f} s: {result.error}"[
                    :500
                ],
            )
        )
    session.flush()
    return outcome


@dataclass
class PassStats:
    """What one delivery pass did."""

    fanned_out: int = 0
    claimed: int = 0
    outcomes: dict[str, int] = field(default_factory=dict)


def new_owner() -> str:
    """A lease token unique to one claim: host, process and a random part."""
    return f"{socket.gethostname()}:{os.getpid()}:{uuid.uuid4().hex[:12]}"


class Deliverer:
    """Runs delivery passes with one kept HTTP client (connection reuse, timeouts)."""

    def __init__(self, factory: sessionmaker[Session], client: httpx.Client | None = None):
        self.factory = factory
        timeout = get_settings().webhook_timeout_s
        self.client = client or httpx.Client(timeout=httpx.Timeout(timeout), follow_redirects=False)

    def close(self) -> None:
        """Close the HTTP client."""
        self.client.close()

    def _tx(self) -> Session:
        session = self.factory()
        begin_write(session)
        return session

    def run_pass(self, now: datetime | None = None, fan: bool = True) -> PassStats:
        """Fan out, claim a batch, deliver each; `now` is for tests that move the clock."""
        settings = get_settings()
        stats = PassStats()
        if fan:
            with self._tx() as s:
                stats.fanned_out = fan_out(s, now)
                s.commit()
        owner = new_owner()
        with self._tx() as s:
            items = claim(
                s, owner, now or utcnow(), settings.webhook_batch, settings.webhook_lease_s
            )
            s.commit()
        stats.claimed = len(items)
        for item in items:
            result = post(self.client, item)
            with self._tx() as s:
                outcome = record(s, item, owner, result, now or utcnow())
                s.commit()
            stats.outcomes[outcome] = stats.outcomes.get(outcome, 0) + 1
        return stats

    def run_safely(self) -> None:
        """A scheduler tick: one pass, errors logged (the next tick tries again)."""
        try:
            stats = self.run_pass()
            if stats.claimed:
                log.info("webhooks: %s claimed, %s", stats.claimed, stats.outcomes)
        except Exception:
            log.exception("webhook delivery pass failed")
