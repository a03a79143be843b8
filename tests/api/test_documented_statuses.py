"""Every error status the OpenAPI document lists is really sent, as the documented problem.

The fuzz run (test_schema_fuzz.py) meets only the statuses random requests reach (400,
401, 404, 422). Here one deliberate request per documented status: each answer must have
that status and pass schemathesis's status-code, content-type and response-schema checks
for its operation (application/problem+json, the Problem and ProblemError schemas). A
status newly documented anywhere fails test_every_documented_status_has_a_trigger until a
request for it is added below.
"""

from __future__ import annotations

from collections.abc import Callable
from datetime import timedelta
from typing import Any

import pytest
import schemathesis
from fastapi import FastAPI
from fastapi.testclient import TestClient
from httpx import Response
from schemathesis.specs.openapi.checks import (
    content_type_conformance,
    response_schema_conformance,
    status_code_conformance,
)

from service.changes.cursors import Cursor, encode
from service.config import get_settings
from service.db.base import utcnow
from service.register import sites as register_sites
from tests.api.test_bad_input_tour import SITE
from tests.api.test_busy import _failing_after_write

CHECKS = [status_code_conformance, content_type_conformance, response_schema_conformance]
METHODS = ("get", "post", "put", "patch", "delete")
LAMP_CSV = "code,technology,rated_watts,rated_volts,rated_life_h\n"


class Ctx:
    """What a trigger needs: the client, keys by scope, and the test's monkeypatch."""

    def __init__(self, client: TestClient, keys: dict[str, dict[str, str]], mp: Any) -> None:
        self.client, self.keys, self.mp = client, keys, mp

    def site(self) -> dict[str, Any]:
        """A stored site (as the API returns it)."""
        r = self.client.post("/api/v1/sites", json=SITE, headers=self.keys["admin"])
        assert r.status_code == 201, r.text
        return dict(r.json())


def _too_many_rows(c: Ctx) -> Response:
    c.mp.setattr(get_settings(), "max_bulk_rows", 1)
    body = LAMP_CSV + "DOC-1,halogen,50,230,2000\nDOC-2,halogen,50,230,2000\n"
    headers = {**c.keys["write"], "content-type": "text/csv"}
    return c.client.post("/api/v1/lamp-types/import", content=body.encode(), headers=headers)


def _busy(c: Ctx) -> Response:
    site = c.site()
    c.mp.setattr(register_sites, "update_site", _failing_after_write("database is locked"))
    url = f"/api/v1/sites/{site['id']}"
    return c.client.patch(url, json={"name": "Busy"}, headers=c.keys["write"])


def _stale(c: Ctx) -> Response:
    site = c.site()
    headers = {**c.keys["write"], "If-Match": '"999"'}
    return c.client.patch(f"/api/v1/sites/{site['id']}", json={"name": "Late"}, headers=headers)


def _old_cursor(c: Ctx) -> Response:
    days = get_settings().change_retention_days + 1
    old = encode(Cursor(0, 1, int((utcnow() - timedelta(days=days)).timestamp())))
    return c.client.get("/api/v1/changes", params={"after": old}, headers=c.keys["read"])


def _duplicate(c: Ctx) -> Response:
    c.site()
    return c.client.post("/api/v1/sites", json=SITE, headers=c.keys["write"])


def _xml_upload(c: Ctx) -> Response:
    headers = {**c.keys["write"], "content-type": "application/xml"}
    return c.client.post("/api/v1/lamp-types/import", content=b"<types/>", headers=headers)


# status -> (method, path template of the operation, the request)
TRIGGERS: dict[int, tuple[str, str, Callable[[Ctx], Response]]] = {
    400: (
        "GET",
        "/api/v1/sites",
        lambda c: c.client.get("/api/v1/sites", params={"api_key": "lk_x"}, headers=c.keys["read"]),
    ),
    401: ("GET", "/api/v1/sites", lambda c: c.client.get("/api/v1/sites")),
    403: (
        "POST",
        "/api/v1/sites",
        lambda c: c.client.post("/api/v1/sites", json=SITE, headers=c.keys["read"]),
    ),
    404: (
        "GET",
        "/api/v1/sites/{site_id}",
        lambda c: c.client.get("/api/v1/sites/987654", headers=c.keys["read"]),
    ),
    409: ("POST", "/api/v1/sites", _duplicate),
    410: ("GET", "/api/v1/changes", _old_cursor),
    412: ("PATCH", "/api/v1/sites/{site_id}", _stale),
    413: ("POST", "/api/v1/lamp-types/import", _too_many_rows),
    415: ("POST", "/api/v1/lamp-types/import", _xml_upload),
    422: (
        "POST",
        "/api/v1/sites",
        lambda c: c.client.post("/api/v1/sites", json={}, headers=c.keys["write"]),
    ),
    503: ("PATCH", "/api/v1/sites/{site_id}", _busy),
}


@pytest.fixture(scope="module")
def schema(app: FastAPI) -> Any:
    """The document as schemathesis reads it."""
    return schemathesis.openapi.from_asgi("/openapi.json", app)


def documented(doc: dict[str, Any]) -> set[int]:
    """Every error status (>= 400) some /api/v1 operation documents."""
    return {
        int(code)
        for path, item in doc["paths"].items()
        if path.startswith("/api/v1/")
        for method, op in item.items()
        if method in METHODS
        for code in op["responses"]
        if code.isdigit() and int(code) >= 400
    }


def test_every_documented_status_has_a_trigger(app: FastAPI) -> None:
    assert documented(app.openapi()) == set(TRIGGERS)


@pytest.mark.parametrize("status", sorted(TRIGGERS))
def test_documented_status_is_sent_as_documented(
    schema: Any,
    client: TestClient,
    make_key: Callable[[str], dict[str, str]],
    monkeypatch: pytest.MonkeyPatch,
    status: int,
) -> None:
    method, path, call = TRIGGERS[status]
    keys = {scope: make_key(scope) for scope in ("read", "write", "admin")}
    response = call(Ctx(client, keys, monkeypatch))
    assert response.status_code == status, response.text
    operation = schema[path][method]
    assert str(status) in operation.definition.raw["responses"]  # documented right here
    case = operation.Case()
    case.validate_response(response, checks=CHECKS)
    body = response.json()
    assert body["status"] == status and body["type"].startswith("/problems/")
