"""Webhook subscriptions over the API: admin only, the secret shown once, redeliver."""

from __future__ import annotations

from fastapi.testclient import TestClient
from sqlalchemy.orm import Session

from service.db.base import utcnow
from service.webhooks.models import WebhookDelivery

URL = "http://127.0.0.1:9/hooks"


def test_crud_and_secret_once(
    client: TestClient, admin: dict[str, str], writer: dict[str, str], allow_loopback: None
) -> None:
    body = {"url": URL, "types": ["work_order", "fixture"], "description": "CMMS"}
    assert client.post("/api/v1/webhooks", json=body, headers=writer).status_code == 403
    r = client.post("/api/v1/webhooks", json=body, headers=admin)
    assert r.status_code == 201, r.text
    created = r.json()
    assert created["secret"].startswith("whsec_") and created["state"] == "active"
    assert r.headers["location"] == f"/api/v1/webhooks/{created['id']}"
    got = client.get(f"/api/v1/webhooks/{created['id']}", headers=admin).json()
    assert "secret" not in got and got["types"] == ["work_order", "fixture"]
    assert all("secret" not in s for s in client.get("/api/v1/webhooks", headers=admin).json())
    r = client.patch(f"/api/v1/webhooks/{created['id']}", json={"state": "paused"}, headers=admin)
    assert r.status_code == 200, r.text
    assert r.json()["state"] == "paused" and r.json()["paused_reason"] == "paused by hand"
    r = client.patch(f"/api/v1/webhooks/{created['id']}", json={"state": "active"}, headers=admin)
    assert r.json()["state"] == "active" and r.json()["paused_at"] is None
    r = client.patch(
        f"/api/v1/webhooks/{created['id']}", json={"types": ["spaceship"]}, headers=admin
    )
    assert r.status_code == 422
    assert client.delete(f"/api/v1/webhooks/{created['id']}", headers=admin).status_code == 204
    assert client.get(f"/api/v1/webhooks/{created['id']}", headers=admin).status_code == 404


def test_redeliver_requeues_a_failed_delivery(
    client: TestClient, db: Session, admin: dict[str, str], allow_loopback: None
) -> None:
    sub = client.post("/api/v1/webhooks", json={"url": URL}, headers=admin).json()
    other = client.post("/api/v1/webhooks", json={"url": URL}, headers=admin).json()
    then = utcnow()
    d = WebhookDelivery(
        subscription_id=sub["id"],
        change_id=1,
        payload={"event_id": "1"},
        state="failed",
        attempts=9,
        next_attempt_at=then,
        window_started_at=then,
    )
    db.add(d)
    db.commit()
    url = f"/api/v1/webhooks/{sub['id']}/deliveries/{d.id}/redeliver"
    r = client.post(url, headers=admin)
    assert r.status_code == 202, r.text
    assert r.json()["state"] == "pending"
    rows = client.get(f"/api/v1/webhooks/{sub['id']}/deliveries", headers=admin).json()
    assert [x["id"] for x in rows] == [d.id]
    wrong = f"/api/v1/webhooks/{other['id']}/deliveries/{d.id}/redeliver"
    assert client.post(wrong, headers=admin).status_code == 422
    missing = f"/api/v1/webhooks/{sub['id']}/deliveries/999999/redeliver"
    assert client.post(missing, headers=admin).status_code == 404
