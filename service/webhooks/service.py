"""Subscription rules: targets checked, the secret made once, pausing, redelivery."""

from __future__ import annotations

from sqlalchemy import select
from sqlalchemy.orm import Session

from service.api.errors import Conflict, Invalid
from service.changes import repository as changes_repository
from service.db.base import utcnow
from service.db.crud import get_or_404
from service.webhooks.models import (
    DeliveryState,
    SubscriptionState,
    WebhookAttempt,
    WebhookDelivery,
    WebhookSubscription,
)
from service.webhooks.schemas import SubscriptionCreate, SubscriptionUpdate
from service.webhooks.signing import new_secret
from service.webhooks.targets import TargetRefused, check_target


def _checked_url(url: str) -> str:
    try:
        check_target(url)
    except TargetRefused as exc:
        raise Invalid(
            f"the webhook target is refused: {exc}",
            errors=[{"field": "url", "in": "body", "message": str(exc)}],
        ) from exc
    return url


def create_subscription(session: Session, data: SubscriptionCreate) -> WebhookSubscription:
    """A new subscription starting at the feed's head (no history replayed)."""
    head = changes_repository.head(session)
    sub = WebhookSubscription(
        url=_checked_url(data.url),
        types=[t.value for t in data.types] if data.types else None,
        description=data.description,
        secret=new_secret(),
        state=SubscriptionState.ACTIVE.value,
        cursor_xact=head.xact_id if head else 0,
        cursor_id=head.id if head else 0,
    )
    session.add(sub)
    session.flush()
    return sub


def get_subscription(session: Session, sub_id: int) -> WebhookSubscription:
    """One subscription or 404."""
    return get_or_404(session, WebhookSubscription, sub_id, "webhook subscription")


def update_subscription(
    session: Session, sub_id: int, data: SubscriptionUpdate
) -> WebhookSubscription:
    """Change URL, types, description or state (resuming clears the pause)."""
    sub = get_subscription(session, sub_id)
    fields = data.model_dump(exclude_unset=True)
    if "url" in fields:
        if fields["url"] is None:
            raise Invalid(
                "url cannot be null", errors=[{"field": "url", "in": "body", "message": "required"}]
            )
        sub.url = _checked_url(fields["url"])
    if "types" in fields:
        sub.types = [t.value for t in data.types] if data.types else None
    if "description" in fields:
        sub.description = data.description
    if fields.get("state") is not None and data.state is not None:
        if data.state == SubscriptionState.ACTIVE:
            sub.state, sub.paused_at, sub.paused_reason = data.state.value, None, None
        elif sub.state != SubscriptionState.PAUSED:
            sub.state, sub.paused_at, sub.paused_reason = (
                data.state.value,
                utcnow(),
                "paused by hand",
            )
    session.flush()
    return sub


def delete_subscription(session: Session, sub_id: int) -> None:
    """Remove a subscription with its outbox and log."""
    session.delete(get_subscription(session, sub_id))
    session.flush()


def list_subscriptions(session: Session) -> list[WebhookSubscription]:
    """Every subscription, oldest first."""
    return list(session.scalars(select(WebhookSubscription).order_by(WebhookSubscription.id)))


def list_deliveries(
    session: Session, sub_id: int, state: DeliveryState | None, limit: int
) -> list[WebhookDelivery]:
    """A subscription's outbox rows, newest first."""
    get_subscription(session, sub_id)
    stmt = select(WebhookDelivery).where(WebhookDelivery.subscription_id == sub_id)
    if state is not None:
        stmt = stmt.where(WebhookDelivery.state == state.value)
    return list(session.scalars(stmt.order_by(WebhookDelivery.id.desc()).limit(limit)))


def list_attempts(session: Session, sub_id: int, limit: int) -> list[WebhookAttempt]:
    """A subscription's delivery log, newest first."""
    get_subscription(session, sub_id)
    stmt = (
        select(WebhookAttempt)
        .where(WebhookAttempt.subscription_id == sub_id)
        .order_by(WebhookAttempt.id.desc())
        .limit(limit)
    )
    return list(session.scalars(stmt))


def redeliver(session: Session, sub_id: int, delivery_id: int) -> WebhookDelivery:
    """Queue a delivery again now, with a fresh retry window (409 while one is in flight)."""
    delivery = get_or_404(session, WebhookDelivery, delivery_id, "delivery")
    if delivery.subscription_id != sub_id:
        raise Invalid(
            "the delivery belongs to another subscription",
            errors=[{"field": "delivery_id", "in": "path", "message": "not this subscription's"}],
        )
    now = utcnow()
    if delivery.lease_expires_at is not None and delivery.lease_expires_at > now:
        raise Conflict("the delivery is being attempted right now; try again shortly")
    delivery.state = DeliveryState.PENDING.value
    delivery.next_attempt_at = now
    delivery.window_started_at = now
    delivery.lease_expires_at = None
    delivery.lease_owner = None
    session.flush()
    return delivery
