"""Pool exhaustion, lost connections, statement timeouts and serialization clashes answer 503.

SQLSTATE codes from the PostgreSQL manual, Appendix A (08xxx, 40001, 57P01, 57014).
"""

from __future__ import annotations

from typing import Any

import pytest
from fastapi.testclient import TestClient
from sqlalchemy.exc import DisconnectionError, OperationalError
from sqlalchemy.exc import TimeoutError as PoolTimeout

from service.register import sites as register_sites
from tests.api.test_bad_input_tour import SITE, assert_problem


class _DriverError(Exception):
    """Stands in for a psycopg error carrying a SQLSTATE."""

    def __init__(self, message: str, sqlstate: str | None) -> None:
        super().__init__(message)
        self.sqlstate = sqlstate


def _raising(exc: Exception) -> Any:
    def fail(*_args: Any, **_kwargs: Any) -> Any:
        raise exc

    return fail


@pytest.mark.parametrize(
    "exc",
    [
        PoolTimeout("QueuePool limit of size 1 overflow 0 reached"),
        DisconnectionError("connection lost"),
        OperationalError(
            "SELECT",
            {},
            _DriverError("terminating connection due to administrator command", "57P01"),
        ),
        OperationalError(
            "SELECT", {}, _DriverError("canceling statement due to statement timeout", "57014")
        ),
        OperationalError("SELECT", {}, _DriverError("could not serialize access", "40001")),
        OperationalError(
            "SELECT", {}, _DriverError("server closed the connection unexpectedly", None)
        ),
        OperationalError("SELECT", {}, _DriverError("odd", None), connection_invalidated=True),
    ],
    ids=[
        "pool-timeout",
        "disconnect",
        "admin-shutdown",
        "query-cancel",
        "serialize",
        "closed",
        "invalidated",
    ],
)
def test_pressure_errors_answer_503_with_retry_after(
    client: TestClient, writer: dict[str, str], monkeypatch: pytest.MonkeyPatch, exc: Exception
) -> None:
    site = client.post("/api/v1/sites", json=SITE, headers=writer).json()
    monkeypatch.setattr(register_sites, "update_site", _raising(exc))
    r = client.patch(f"/api/v1/sites/{site['id']}", json={"name": "Renamed"}, headers=writer)
    assert_problem(r, 503)
    assert r.headers["retry-after"] == "1"
    monkeypatch.undo()
    assert client.get(f"/api/v1/sites/{site['id']}", headers=writer).json()["name"] == SITE["name"]
