"""Webhook subscriptions, their outbox of deliveries and the log of attempts."""

from __future__ import annotations

from datetime import datetime
from enum import StrEnum
from typing import Any

from sqlalchemy import (
    JSON,
    BigInteger,
    CheckConstraint,
    Float,
    ForeignKey,
    Index,
    Integer,
    String,
    Text,
    UniqueConstraint,
    func,
)
from sqlalchemy.orm import Mapped, mapped_column

from service.db.base import Base, TimestampMixin, UTCDateTime, utcnow


class SubscriptionState(StrEnum):
    """A subscription is delivered to, or paused (by hand or after a day of failures)."""

    ACTIVE = "active"
    PAUSED = "paused"


class DeliveryState(StrEnum):
    """An outbox row: waiting (or retrying), delivered (2xx), or failed for good."""

    PENDING = "pending"
    DELIVERED = "delivered"
    FAILED = "failed"


class WebhookSubscription(TimestampMixin, Base):
    """A receiver URL, the resource types it wants and the secret its deliveries are signed with."""

    __tablename__ = "webhook_subscriptions"
    __table_args__ = (CheckConstraint("state IN ('active', 'paused')", name="state"),)

    id: Mapped[int] = mapped_column(primary_key=True)
    version: Mapped[int] = mapped_column(Integer, server_default="1")
    __mapper_args__ = {"version_id_col": version}
    url: Mapped[str] = mapped_column(String(2000))
    types: Mapped[list[str] | None] = mapped_column(JSON, default=None)  # None: every type
    # Kept as is: the service signs with it (shown once, at creation; never read back).
    secret: Mapped[str] = mapped_column(String(100))
    description: Mapped[str | None] = mapped_column(String(300), default=None)
    state: Mapped[str] = mapped_column(String(10), default=SubscriptionState.ACTIVE.value)
    paused_at: Mapped[datetime | None] = mapped_column(default=None)
    paused_reason: Mapped[str | None] = mapped_column(String(500), default=None)
    # Feed position of the fan-out into the outbox: the last change taken.
    cursor_xact: Mapped[int] = mapped_column(BigInteger, server_default="0")
    cursor_id: Mapped[int] = mapped_column(BigInteger, server_default="0")


class WebhookDelivery(Base):
    """One change to deliver to one subscription (the outbox row), with its retry state."""

    __tablename__ = "webhook_deliveries"
    __table_args__ = (
        UniqueConstraint("subscription_id", "change_id"),
        CheckConstraint("state IN ('pending', 'delivered', 'failed')", name="state"),
        Index("ix_webhook_deliveries_state_next", "state", "next_attempt_at"),
    )

    id: Mapped[int] = mapped_column(primary_key=True)
    subscription_id: Mapped[int] = mapped_column(
        ForeignKey("webhook_subscriptions.id", ondelete="CASCADE")
    )
    change_id: Mapped[int] = mapped_column(BigInteger)  # the event id
    payload: Mapped[dict[str, Any]] = mapped_column(JSON)  # kept: changes are pruned
    state: Mapped[str] = mapped_column(String(10), default=DeliveryState.PENDING.value)
    attempts: Mapped[int] = mapped_column(Integer, server_default="0", default=0)
    next_attempt_at: Mapped[datetime] = mapped_column(UTCDateTime())
    # Set while a worker holds the row; a lease past its time is claimable again.
    lease_expires_at: Mapped[datetime | None] = mapped_column(default=None)
    lease_owner: Mapped[str | None] = mapped_column(String(200), default=None)
    last_status: Mapped[int | None] = mapped_column(Integer, default=None)
    last_error: Mapped[str | None] = mapped_column(Text, default=None)
    delivered_at: Mapped[datetime | None] = mapped_column(default=None)
    created_at: Mapped[datetime] = mapped_column(
        UTCDateTime(), default=utcnow, server_default=func.now()
    )
    # Start of the current retry window (creation, or a redeliver): give up a day after it.
    window_started_at: Mapped[datetime] = mapped_column(UTCDateTime(), default=utcnow)


class WebhookAttempt(Base):
    """One POST of a delivery: HTTP status (or error) and latency; the subscription's log."""

    __tablename__ = "webhook_attempts"

    id: Mapped[int] = mapped_column(primary_key=True)
    delivery_id: Mapped[int] = mapped_column(
        ForeignKey("webhook_deliveries.id", ondelete="CASCADE"), index=True
    )
    subscription_id: Mapped[int] = mapped_column(
        ForeignKey("webhook_subscriptions.id", ondelete="CASCADE"), index=True
    )
    attempt_no: Mapped[int] = mapped_column(Integer)
    started_at: Mapped[datetime] = mapped_column(UTCDateTime())
    status_code: Mapped[int | None] = mapped_column(Integer, default=None)
    latency_ms: Mapped[float] = mapped_column(Float)  # milliseconds
    error: Mapped[str | None] = mapped_column(Text, default=None)
    outcome: Mapped[str] = mapped_column(String(10))  # delivered | retry | failed
