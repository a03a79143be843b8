"""Idempotency-Key replays, ETag / If-None-Match / If-Match and Location, through the app."""

from __future__ import annotations

from typing import Any

from fastapi.testclient import TestClient
from sqlalchemy import func, select
from sqlalchemy.orm import Session

from service.register.models import Site

SITE: dict[str, Any] = {
    "name": "Retry Test Depot",
    "time_zone": "Europe/Dublin",
    "nominal_voltage_v": 230,
    "currency": "EUR",
    "energy_price_per_kwh": 0.2,
    "labour_rate_per_h": 40,
}


def _sites(db: Session) -> int:
    return int(db.scalar(select(func.count()).select_from(Site)) or 0)


def test_site_replay_creates_nothing_new(
    client: TestClient, writer: dict[str, str], db: Session
) -> None:
    headers = {**writer, "Idempotency-Key": "k-1"}
    first = client.post("/api/v1/sites", json=SITE, headers=headers)
    assert first.status_code == 201, first.text
    count = _sites(db)
    again = client.post("/api/v1/sites", json=SITE, headers=headers)
    assert again.status_code == 201
    assert again.json() == first.json()
    assert again.headers["location"] == first.headers["location"]
    assert _sites(db) == count
    other = client.post("/api/v1/sites", json={**SITE, "name": "Other"}, headers=headers)
    assert other.status_code == 422
    assert other.json()["errors"][0]["field"] == "Idempotency-Key"
    assert _sites(db) == count


def test_location_etag_304_and_412(client: TestClient, writer: dict[str, str]) -> None:
    created = client.post("/api/v1/sites", json=SITE, headers=writer)
    got = client.get(created.headers["location"], headers=writer)
    assert got.status_code == 200
    etag = got.headers["etag"]
    assert etag == f'"{got.json()["version"]}"'
    assert (
        client.get(
            created.headers["location"], headers={**writer, "If-None-Match": etag}
        ).status_code
        == 304
    )
    ok = client.patch(
        created.headers["location"], json={"notes": "a"}, headers={**writer, "If-Match": etag}
    )
    assert ok.status_code == 200, ok.text
    assert ok.json()["version"] == got.json()["version"] + 1
    stale = client.patch(
        created.headers["location"], json={"notes": "b"}, headers={**writer, "If-Match": etag}
    )
    assert stale.status_code == 412
    assert stale.headers["content-type"].startswith("application/problem+json")
    gone = client.delete(created.headers["location"], headers={**writer, "If-Match": etag})
    assert gone.status_code == 412
    assert client.get(created.headers["location"], headers=writer).status_code == 200


def test_in_flight_claim_409_and_abandoned_claim_lapses(
    client: TestClient, writer: dict[str, str], db: Session
) -> None:
    import hashlib
    import json
    from datetime import timedelta

    from service.db.base import utcnow
    from service.idempotency.models import IdempotencyKey
    from service.keys.models import ApiKey
    from service.keys.service import digest

    raw = json.dumps(SITE).encode()
    key = db.scalar(select(ApiKey).where(ApiKey.digest == digest(writer["Authorization"][7:])))
    assert key is not None
    now = utcnow()
    claim = IdempotencyKey(
        api_key_id=key.id, method="POST", route="/api/v1/sites", idem_key="busy",
        body_sha256=hashlib.sha256(raw).hexdigest(), created_at=now,
        expires_at=now + timedelta(minutes=5),
    )  # fmt: skip
    db.add(claim)
    db.commit()
    headers = {**writer, "Idempotency-Key": "busy", "Content-Type": "application/json"}
    count = _sites(db)
    busy = client.post("/api/v1/sites", content=raw, headers=headers)
    assert busy.status_code == 409
    assert _sites(db) == count
    claim.expires_at = now - timedelta(seconds=1)  # the first process died long ago
    db.commit()
    rerun = client.post("/api/v1/sites", content=raw, headers=headers)
    assert rerun.status_code == 201, rerun.text
    assert _sites(db) == count + 1
