"""HTTP routes of webhook subscriptions (admin): CRUD, deliveries, log, redeliver."""

from __future__ import annotations

from typing import Annotated

from fastapi import APIRouter, Query, Response, status

from service.api.auth import AdminKey, SessionDep
from service.api.ids import IdPath
from service.webhooks import service
from service.webhooks.models import DeliveryState
from service.webhooks.schemas import (
    AttemptRead,
    DeliveryRead,
    SubscriptionCreate,
    SubscriptionCreated,
    SubscriptionRead,
    SubscriptionUpdate,
)

router = APIRouter(tags=["webhooks"])
Limit = Annotated[int, Query(ge=1, le=1000, description="Rows to show.")]


@router.post("/webhooks", response_model=SubscriptionCreated, status_code=status.HTTP_201_CREATED)
def create_webhook(
    body: SubscriptionCreate, session: SessionDep, _: AdminKey, response: Response
) -> SubscriptionCreated:
    """Subscribe a URL to changes; the answer shows the signing secret, this once only."""
    sub = service.create_subscription(session, body)
    response.headers["Location"] = f"/api/v1/webhooks/{sub.id}"
    read = SubscriptionRead.model_validate(sub)
    return SubscriptionCreated(**read.model_dump(), secret=sub.secret)


@router.get("/webhooks", response_model=list[SubscriptionRead])
def list_webhooks(session: SessionDep, _: AdminKey) -> list[SubscriptionRead]:
    """Every subscription (without secrets)."""
    return [SubscriptionRead.model_validate(s) for s in service.list_subscriptions(session)]


@router.get("/webhooks/{sub_id}", response_model=SubscriptionRead)
def get_webhook(sub_id: IdPath, session: SessionDep, _: AdminKey) -> SubscriptionRead:
    """One subscription; `state: paused` with a reason after a day of failed deliveries."""
    return SubscriptionRead.model_validate(service.get_subscription(session, sub_id))


@router.patch("/webhooks/{sub_id}", response_model=SubscriptionRead)
def update_webhook(
    sub_id: IdPath, body: SubscriptionUpdate, session: SessionDep, _: AdminKey
) -> SubscriptionRead:
    """Change a subscription; `{"state": "active"}` resumes a paused one."""
    return SubscriptionRead.model_validate(service.update_subscription(session, sub_id, body))


@router.delete("/webhooks/{sub_id}", status_code=status.HTTP_204_NO_CONTENT)
def delete_webhook(sub_id: IdPath, session: SessionDep, _: AdminKey) -> Response:
    """Remove a subscription with its outbox and delivery log."""
    service.delete_subscription(session, sub_id)
    return Response(status_code=status.HTTP_204_NO_CONTENT)


@router.get("/webhooks/{sub_id}/deliveries", response_model=list[DeliveryRead])
def list_webhook_deliveries(
    sub_id: IdPath,
    session: SessionDep,
    _: AdminKey,
    state: DeliveryState | None = None,
    limit: Limit = 100,
) -> list[DeliveryRead]:
    """The subscription's outbox rows, newest first."""
    rows = service.list_deliveries(session, sub_id, state, limit)
    return [DeliveryRead.model_validate(d) for d in rows]


@router.get("/webhooks/{sub_id}/attempts", response_model=list[AttemptRead])
def list_webhook_attempts(
    sub_id: IdPath, session: SessionDep, _: AdminKey, limit: Limit = 100
) -> list[AttemptRead]:
    """The delivery log: each POST with its status or error and latency, newest first."""
    return [AttemptRead.model_validate(a) for a in service.list_attempts(session, sub_id, limit)]


@router.post(
    "/webhooks/{sub_id}/deliveries/{delivery_id}/redeliver",
    response_model=DeliveryRead,
    status_code=status.HTTP_202_ACCEPTED,
)
def redeliver_webhook(
    sub_id: IdPath, delivery_id: IdPath, session: SessionDep, _: AdminKey
) -> DeliveryRead:
    """Queue a delivery again now (the next delivery pass sends it)."""
    return DeliveryRead.model_validate(service.redeliver(session, sub_id, delivery_id))
