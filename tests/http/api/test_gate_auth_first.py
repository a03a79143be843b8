"""The key check runs before any validation: 401 (never 422) on every /api/v1 route."""

from __future__ import annotations

import asyncio
import logging
import re
from collections.abc import Iterator
from typing import Any

import pytest
from fastapi import FastAPI
from fastapi.routing import iter_route_contexts
from fastapi.testclient import TestClient
from sqlalchemy.exc import TimeoutError as PoolTimeout

from service.api import gate
from service.keys import service as keys_service
from tests.api.test_bad_input_tour import SITE, assert_problem

GARBAGE_QUERY = {"zzz": "1", "limit": "not-a-number", "site_id": "x" * 300}
GARBAGE_BODY = b'{"name": 12, "unknown": [1, 2, '  # broken JSON


def api_routes(app: FastAPI) -> Iterator[tuple[str, str]]:
    """(method, path with every path parameter set to 1) of every /api/v1 route."""
    for route in iter_route_contexts(app.routes):
        path = route.path or ""
        if not path.startswith("/api/v1"):
            continue
        for method in sorted(route.methods or ()):
            yield method, re.sub(r"\{[^}]+\}", "1", path)


def _send(client: TestClient, method: str, path: str, headers: dict[str, str]) -> Any:
    return client.request(
        method,
        path,
        params=GARBAGE_QUERY,
        content=GARBAGE_BODY,
        headers={"Content-Type": "application/json", **headers},
    )


def test_the_sweep_covers_the_api(app: FastAPI) -> None:
    routes = list(api_routes(app))
    # Every domain router is there, with its write routes (a sweep over nothing proves nothing).
    assert len(routes) >= 60
    assert ("POST", "/api/v1/work-orders/1/complete") in routes
    assert ("POST", "/api/v1/burn-hours/bulk") in routes


@pytest.mark.parametrize(
    "auth",
    [{}, {"Authorization": "Bearer lk_not-a-key"}, {"Authorization": "Basic abc"}],
    ids=["no-key", "unknown-key", "other-scheme"],
)
def test_every_route_answers_401_before_validation(
    app: FastAPI, client: TestClient, auth: dict[str, str]
) -> None:
    for method, path in api_routes(app):
        r = _send(client, method, path, auth)
        body = assert_problem(r, 401)
        assert r.headers["www-authenticate"] == "Bearer", (method, path)
        # Nothing about the route's parameters leaks.
        assert "errors" not in body and "limit" not in r.text, (method, path)


def test_every_route_answers_401_to_a_revoked_key(
    app: FastAPI, client: TestClient, db: Any, admin: dict[str, str]
) -> None:
    row, secret = keys_service.create_key(db, "soon-revoked", "admin")
    keys_service.revoke_key(db, row.id)
    db.commit()
    for method, path in api_routes(app):
        assert_problem(_send(client, method, path, {"Authorization": f"Bearer {secret}"}), 401)
    # The same garbage with a good key reaches validation (the gate let it through).
    r = _send(client, "POST", "/api/v1/sites", admin)
    assert r.status_code in (400, 422), r.text


def test_scopes_stay_in_the_routes(client: TestClient, reader: dict[str, str]) -> None:
    assert client.get("/api/v1/sites", headers=reader).status_code == 200
    r = client.post("/api/v1/sites", json=SITE, headers=reader)
    assert_problem(r, 403)


@pytest.mark.parametrize("name", ["api_key", "key", "token", "access_token", "API_KEY"])
def test_key_in_query_is_refused_and_not_logged(
    client: TestClient, reader: dict[str, str], caplog: pytest.LogCaptureFixture, name: str
) -> None:
    secret = reader["Authorization"].removeprefix("Bearer ")
    caplog.set_level(logging.DEBUG)
    for headers in ({}, reader):
        r = client.get("/api/v1/sites", params={name: secret}, headers=headers)
        body = assert_problem(r, 400)
        assert body["errors"][0]["field"] == name and secret not in r.text
    # The service's own logs (the test client's httpx logs its URL, so it is left out).
    service_logs = [rec for rec in caplog.records if not rec.name.startswith("httpx")]
    assert all(secret not in rec.getMessage() for rec in service_logs)


def test_key_in_query_is_blanked_out_of_the_scope() -> None:
    """The access log prints scope['query_string']: the gate leaves no secret there."""
    scope: dict[str, Any] = {"query_string": b"site_id=3&access_token=lk_secret&x=1"}
    assert gate.key_in_query(scope) == ["access_token"]
    assert b"lk_secret" not in scope["query_string"]
    assert b"site_id=3" in scope["query_string"]
    clean: dict[str, Any] = {"query_string": b"site_id=3&keyword=lamp"}
    assert gate.key_in_query(clean) == [] and clean["query_string"] == b"site_id=3&keyword=lamp"


def test_paths_outside_the_api_are_not_gated(client: TestClient) -> None:
    assert client.get("/healthz").status_code == 200
    assert client.get("/", params={"token": "x"}).status_code == 200


def test_busy_database_in_the_gate_answers_503(
    client: TestClient, reader: dict[str, str], monkeypatch: pytest.MonkeyPatch
) -> None:
    def busy(*_args: Any, **_kwargs: Any) -> Any:
        raise PoolTimeout("QueuePool limit of size 1 overflow 0 reached")

    monkeypatch.setattr(gate.keys, "find_active", busy)
    r = client.get("/api/v1/sites", headers=reader)
    assert_problem(r, 503)
    assert r.headers["retry-after"] == "1"


def test_gate_runs_before_the_idempotency_middleware(app: FastAPI) -> None:
    """Starlette runs the middleware added last first: the gate must be outermost."""
    names = [m.cls.__name__ for m in app.user_middleware]  # type: ignore[attr-defined]
    assert names.index("GateMiddleware") < names.index("IdempotencyMiddleware")


def test_websocket_and_lifespan_scopes_pass_through() -> None:
    seen: list[str] = []

    async def inner(scope: Any, receive: Any, send: Any) -> None:
        seen.append(scope["type"])

    async def nothing() -> Any:
        return {}

    async def ignore(_message: Any) -> None:
        return None

    asyncio.run(gate.GateMiddleware(inner)({"type": "lifespan"}, nothing, ignore))
    assert seen == ["lifespan"]
