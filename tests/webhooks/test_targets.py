"""Webhook targets: loopback, private and link-local addresses refused unless allowed."""

from __future__ import annotations

import pytest
from fastapi.testclient import TestClient

from service.config import get_settings
from service.webhooks.targets import TargetRefused, check_target

REFUSED = [
    "http://127.0.0.1:8080/x",
    "http://[::1]/x",
    "http://localhost/x",
    "http://10.1.2.3/x",
    "http://192.168.0.10/x",
    "http://172.16.5.5/x",
    "http://169.254.169.254/latest",  # link-local (cloud metadata)
    "http://0.0.0.0/x",
    "http://[fe80::1]/x",
]


@pytest.mark.parametrize("url", REFUSED)
def test_internal_targets_are_refused(url: str) -> None:
    with pytest.raises(TargetRefused):
        check_target(url)


@pytest.mark.parametrize("url", ["ftp://93.184.216.34/x", "http:///x", "http://u:p@93.184.216.34/"])
def test_malformed_targets_are_refused(url: str) -> None:
    with pytest.raises(TargetRefused):
        check_target(url)


def test_public_address_is_accepted() -> None:
    check_target("https://93.184.216.34/hooks")  # a literal: no DNS needed


def test_settings_allow_loopback_and_private(monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.setattr(get_settings(), "webhook_allow_loopback", True)
    check_target("http://127.0.0.1:9/x")
    with pytest.raises(TargetRefused):
        check_target("http://10.1.2.3/x")
    monkeypatch.setattr(get_settings(), "webhook_allow_private", True)
    check_target("http://10.1.2.3/x")


def test_api_refuses_a_loopback_target(client: TestClient, admin: dict[str, str]) -> None:
    r = client.post("/api/v1/webhooks", json={"url": "http://127.0.0.1:9/x"}, headers=admin)
    assert r.status_code == 422
    assert r.headers["content-type"].startswith("application/problem+json")
    assert r.json()["errors"][0]["field"] == "url"
