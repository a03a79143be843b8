"""Webhook bodies: subscriptions (the secret only in the creation answer), deliveries, attempts."""

from __future__ import annotations

from datetime import datetime
from typing import Any

from pydantic import BaseModel, ConfigDict, Field

from service.changes.schemas import ResourceType
from service.webhooks.models import DeliveryState, SubscriptionState

URL_FIELD = Field(min_length=8, max_length=2000, examples=["https://cmms.example.test/hooks/lk"])


class SubscriptionCreate(BaseModel):
    """A new subscription: where to POST and which resource types (all when omitted)."""

    model_config = ConfigDict(extra="forbid")

    url: str = URL_FIELD
    types: list[ResourceType] | None = Field(default=None, max_length=20)
    description: str | None = Field(default=None, max_length=300)


class SubscriptionUpdate(BaseModel):
    """Fields to change; `state: active` resumes a paused subscription."""

    model_config = ConfigDict(extra="forbid")

    url: str | None = Field(default=None, min_length=8, max_length=2000)
    types: list[ResourceType] | None = Field(default=None, max_length=20)
    description: str | None = Field(default=None, max_length=300)
    state: SubscriptionState | None = None


class SubscriptionRead(BaseModel):
    """A subscription as stored, without its secret."""

    model_config = ConfigDict(from_attributes=True)

    id: int
    url: str
    types: list[ResourceType] | None
    description: str | None
    state: SubscriptionState
    paused_at: datetime | None
    paused_reason: str | None
    version: int
    created_at: datetime


class SubscriptionCreated(SubscriptionRead):
    """The creation answer: the only time the signing secret is shown."""

    secret: str


class DeliveryRead(BaseModel):
    """One outbox row: the change delivered and where its retries stand."""

    model_config = ConfigDict(from_attributes=True)

    id: int
    subscription_id: int
    change_id: int
    state: DeliveryState
    attempts: int
    next_attempt_at: datetime
    last_status: int | None
    last_error: str | None
    delivered_at: datetime | None
    created_at: datetime
    payload: dict[str, Any]


class AttemptRead(BaseModel):
    """One POST in a subscription's delivery log."""

    model_config = ConfigDict(from_attributes=True)

    id: int
    delivery_id: int
    attempt_no: int
    started_at: datetime
    status_code: int | None
    latency_ms: float
    error: str | None
    outcome: str
