"""Webhook fixtures: the feed tests' committed database, loopback targets allowed."""

from __future__ import annotations

import pytest

from service.config import get_settings
from tests.changes.conftest import live, live_admin, live_engine, live_factory, live_url

__all__ = ["live", "live_admin", "live_engine", "live_factory", "live_url"]


@pytest.fixture()
def allow_loopback(monkeypatch: pytest.MonkeyPatch) -> None:
    """Let webhooks target 127.0.0.1 (the tests' receiver) for this test."""
    monkeypatch.setattr(get_settings(), "webhook_allow_loopback", True)
