"""Webhook fixtures: the feed tests' committed database, loopback targets allowed."""

from __future__ import annotations

from collections.abc import Iterator
from typing import Any

import pytest
from fastapi.testclient import TestClient

from service.config import get_settings
from tests.changes.conftest import live, live_admin, live_engine, live_factory, live_url
from tests.webhooks.receiver import Receiver, receiver

__all__ = ["live", "live_admin", "live_engine", "live_factory", "live_url"]


@pytest.fixture()
def allow_loopback(monkeypatch: pytest.MonkeyPatch) -> None:
    """Let webhooks target 127.0.0.1 (the tests' receiver) for this test."""
    monkeypatch.setattr(get_settings(), "webhook_allow_loopback", True)


@pytest.fixture()
def rec(allow_loopback: None) -> Iterator[Receiver]:
    """A receiver serving for one test."""
    with receiver() as r:
        yield r


@pytest.fixture()
def subscription(
    live: TestClient, live_admin: dict[str, str], rec: Receiver
) -> Iterator[dict[str, Any]]:
    """A site subscription to the receiver, removed after the test."""
    r = live.post("/api/v1/webhooks", json={"url": rec.url, "types": ["site"]}, headers=live_admin)
    assert r.status_code == 201, r.text
    yield r.json()
    live.delete(f"/api/v1/webhooks/{r.json()['id']}", headers=live_admin)
