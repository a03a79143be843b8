"""A database too busy to take a write answers 503 with Retry-After, and saves nothing.

Found by fuzzing with two workers on SQLite: a write that met another connection's write
lock failed with "database is locked" and answered 500. It is a transient clash, not a
fault: the change was rolled back and may be sent again.
"""

from __future__ import annotations

import sqlite3
from typing import Any

import pytest
from fastapi.testclient import TestClient
from sqlalchemy.exc import OperationalError
from sqlalchemy.orm import Session

from service.register import sites as register_sites
from tests.api.test_bad_input_tour import SITE, assert_problem


def _failing_after_write(message: str) -> Any:
    real = register_sites.update_site

    def update_then_fail(session: Session, site_id: int, body: Any) -> Any:
        real(session, site_id, body)  # the change is flushed, then the driver gives up
        raise OperationalError("UPDATE sites ...", {}, sqlite3.OperationalError(message))

    return update_then_fail


@pytest.mark.parametrize(
    "message",
    [
        "database is locked",
        "deadlock detected",
        "could not serialize access due to concurrent update",
    ],
)
def test_busy_database_is_a_503_and_saves_nothing(
    client: TestClient, writer: dict[str, str], monkeypatch: pytest.MonkeyPatch, message: str
) -> None:
    site = client.post("/api/v1/sites", json=SITE, headers=writer).json()
    monkeypatch.setattr(register_sites, "update_site", _failing_after_write(message))
    r = client.patch(f"/api/v1/sites/{site['id']}", json={"name": "Renamed"}, headers=writer)
    assert_problem(r, 503)
    assert r.headers["retry-after"] == "1"
    assert client.get(f"/api/v1/sites/{site['id']}", headers=writer).json()["name"] == SITE["name"]


def test_other_operational_errors_stay_internal(
    client: TestClient, writer: dict[str, str], monkeypatch: pytest.MonkeyPatch
) -> None:
    site = client.post("/api/v1/sites", json=SITE, headers=writer).json()
    monkeypatch.setattr(register_sites, "update_site", _failing_after_write("disk I/O error"))
    r = client.patch(f"/api/v1/sites/{site['id']}", json={"name": "Renamed"}, headers=writer)
    assert_problem(r, 500)
