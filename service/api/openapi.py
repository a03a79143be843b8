"""The OpenAPI document in one place: bearer security, problem+json errors, offline docs.

FastAPI's generated document is post-processed once per route set:

- every /api/v1 operation requires the ``apiKey`` bearer scheme (so /docs can authorise);
- every error status an operation can answer is documented as ``application/problem+json``
  with the one shared ``Problem`` schema. The statuses are derived from what the route is
  built from, never listed per route by hand (``error_statuses``): the gate (400 key in the
  URL, 401, 413 body limit), the guard and validation (422), the busy database (503), the
  key's scope (403 above ``read``), path ids and referenced ids (404), writes (409: clashes,
  stale versions, an Idempotency-Key in flight), ``versioned`` rows (412 on writes, 304 on
  reads), raw uploads (415, 413 row limit). A route may add its own (``responses={410: ...}``);
  those are rendered with the same schema;
- operationIds are the route function names (``operation_id``), unique across the API;
- /docs and /redoc are served from the Swagger UI and ReDoc files shipped in the
  ``fastapi-offline`` package (both UIs, one kept package), so nothing loads from a CDN.
"""

from __future__ import annotations

from collections.abc import Iterator
from pathlib import Path
from typing import Any

import fastapi_offline
from fastapi import FastAPI, routing
from fastapi.dependencies.models import Dependant
from fastapi.openapi.docs import (
    get_redoc_html,
    get_swagger_ui_html,
    get_swagger_ui_oauth2_redirect_html,
)
from fastapi.openapi.utils import get_openapi
from fastapi.responses import HTMLResponse
from fastapi.staticfiles import StaticFiles

from service.api.bulk import raw_body
from service.api.errors import PROBLEM_MEDIA_TYPE

API_PREFIX = "/api/v1"
SECURITY_SCHEME = "apiKey"
DOCS_ASSETS = "/docs-assets"
ASSETS_DIR = Path(fastapi_offline.__file__).parent / "static"
WRITE_METHODS = frozenset({"POST", "PUT", "PATCH", "DELETE"})
BODY_METHODS = frozenset({"POST", "PUT", "PATCH"})
REQUEST_ID_HEADER = "X-Request-ID"

# What each documented error status means, as the description of its response.
STATUS_TEXT: dict[int, str] = {
    400: "Bad request: an API key sent in the URL (send it as a Bearer header).",
    401: "No API key, or an unknown or revoked one (WWW-Authenticate: Bearer).",
    403: "The API key's scope is too low for this operation.",
    404: "A record named in the path or the request does not exist.",
    409: "The change clashes with stored data: a duplicate, a record in use, a lifecycle "
    "rule, a record changed at the same moment, or the same Idempotency-Key still running.",
    410: "Gone: the resource or cursor is past its retention.",
    412: "If-Match names a version the record no longer has.",
    413: "The body is larger than the service's limit, or the upload has too many rows.",
    415: "The upload is neither CSV nor JSON.",
    422: "A field is missing, malformed or breaks a rule; `errors[]` names each one.",
    428: "This operation needs an If-Match header.",
    503: "The database was busy or its connection was lost; nothing was saved (Retry-After).",
}

PROBLEM_ERROR_SCHEMA: dict[str, Any] = {
    "title": "ProblemError",
    "type": "object",
    "description": "One field at fault: `field` and `in` (body, query, path, header) name it. "
    "An upload's row errors also carry the optional `row` (the row's number in the file; "
    "`in` is then body), with `field` null when the whole row or upload is at fault.",
    "required": ["field", "in", "message"],
    "properties": {
        "field": {"type": ["string", "null"], "description": "The field as a client names it."},
        "in": {
            "type": "string",
            "enum": ["body", "query", "path", "header"],
            "description": "Where: body, query, path or header.",
        },
        "message": {"type": "string"},
        "type": {"type": "string", "description": "A machine-readable error kind."},
        "row": {
            "type": "integer",
            "minimum": 1,
            "description": "Optional: the upload row number (1 = the CSV header line or the "
            "first JSON item), present only on bulk-upload errors.",
        },
    },
}

PROBLEM_SCHEMA: dict[str, Any] = {
    "title": "Problem",
    "type": "object",
    "description": "An RFC 9457 problem detail; every error of the API has this shape.",
    "required": ["type", "title", "status", "detail"],
    "properties": {
        "type": {"type": "string", "format": "uri-reference", "examples": ["/problems/conflict"]},
        "title": {"type": "string"},
        "status": {"type": "integer", "minimum": 100, "maximum": 599},
        "detail": {"type": "string"},
        "instance": {"type": "string", "description": "The path the problem arose on."},
        "request_id": {"type": "string", "description": "The X-Request-ID of the request."},
        "errors": {
            "type": "array",
            "items": {"$ref": "#/components/schemas/ProblemError"},
        },
    },
    "additionalProperties": True,
}


def operation_id(route: routing.APIRoute) -> str:
    """The operationId of a route: its function name (a readable, stable name)."""
    return route.name


def _calls(dependant: Dependant) -> Iterator[Any]:
    """Every dependency callable of a route, depth first."""
    for sub in dependant.dependencies:
        yield sub.call
        yield from _calls(sub)


def _refers_to_ids(operation: dict[str, Any], schemas: dict[str, Any]) -> bool:
    """True when a query parameter or a body field names another record (`*_id`)."""
    for param in operation.get("parameters", []):
        if param.get("in") == "query" and param["name"].endswith("_id"):
            return True
    content = operation.get("requestBody", {}).get("content", {})
    for media in content.values():
        ref = media.get("schema", {}).get("$ref", "")
        body = schemas.get(ref.rsplit("/", 1)[-1], {}) if ref else media.get("schema", {})
        if any(
            name.endswith("_id") or name.endswith("_ids") for name in body.get("properties", {})
        ):
            return True
    return False


def error_statuses(
    method: str, route: Any, operation: dict[str, Any], schemas: dict[str, Any]
) -> set[int]:
    """The error statuses an /api/v1 operation can answer, from how the route is built."""
    calls = list(_calls(route.dependant))
    statuses = {400, 401, 422, 503}  # gate (key in URL, key), guard and validation, busy
    scopes = {getattr(c, "required_scope", None) for c in calls} - {None}
    if scopes - {"read"}:
        statuses.add(403)
    in_path = any(p.get("in") == "path" for p in operation.get("parameters", []))
    if in_path or _refers_to_ids(operation, schemas):
        statuses.add(404)
    if method in WRITE_METHODS:
        statuses.add(409)
    if method in BODY_METHODS:
        statuses.add(413)
    if any(hasattr(c, "versioned_model") for c in calls) and method in WRITE_METHODS:
        statuses.add(412)
    if any(c is raw_body for c in calls):
        statuses.update({413, 415})
    return statuses


def _problem_response(status: int, description: str | None = None) -> dict[str, Any]:
    return {
        "description": description or STATUS_TEXT.get(status, "Error."),
        "headers": {REQUEST_ID_HEADER: {"$ref": "#/components/headers/RequestId"}},
        "content": {PROBLEM_MEDIA_TYPE: {"schema": {"$ref": "#/components/schemas/Problem"}}},
    }


def _drop_unused(doc: dict[str, Any], names: tuple[str, ...]) -> None:
    """Remove FastAPI's own validation schemas once nothing refers to them."""
    text = str(doc["paths"])
    schemas = doc["components"]["schemas"]
    for name in names:
        if f"#/components/schemas/{name}" not in text:
            schemas.pop(name, None)


def build_document(app: FastAPI) -> dict[str, Any]:
    """The whole OpenAPI document of the app, post-processed as the module says."""
    doc = get_openapi(
        title=app.title,
        version=app.version,
        openapi_version=app.openapi_version,
        summary=app.summary,
        description=app.description,
        routes=app.routes,
        tags=app.openapi_tags,
    )
    components = doc.setdefault("components", {})
    schemas = components.setdefault("schemas", {})
    schemas["Problem"] = PROBLEM_SCHEMA
    schemas["ProblemError"] = PROBLEM_ERROR_SCHEMA
    components["headers"] = {
        "RequestId": {
            "description": "The request id: the caller's X-Request-ID, or one the service made.",
            "schema": {"type": "string"},
        }
    }
    components["securitySchemes"] = {
        SECURITY_SCHEME: {
            "type": "http",
            "scheme": "bearer",
            "description": "An API key: `Authorization: Bearer <key>` (keys have a scope: "
            "read < write < admin).",
        }
    }
    for context in routing.iter_route_contexts(app.routes):
        if not isinstance(context.original_route, routing.APIRoute):
            continue
        path = context.path_format or ""
        if not path.startswith(API_PREFIX) or not context.include_in_schema:
            continue
        for method in context.methods or ():
            operation = doc["paths"].get(path, {}).get(method.lower())
            if operation is None:
                continue
            operation["security"] = [{SECURITY_SCHEME: []}]
            responses = operation.setdefault("responses", {})
            for code, answer in list(responses.items()):
                if code.isdigit() and int(code) >= 400:
                    described = answer.get("description")
                    if code == "422" or described in (None, "Validation Error"):
                        described = None
                    responses[code] = _problem_response(int(code), described)
            for status in sorted(error_statuses(method, context, operation, schemas)):
                responses.setdefault(str(status), _problem_response(status))
            versioned = any(hasattr(c, "versioned_model") for c in _calls(context.dependant))
            if versioned and method == "GET":
                responses.setdefault(
                    "304", {"description": "Not modified: If-None-Match names the ETag."}
                )
            for answer in responses.values():
                answer.setdefault("headers", {}).setdefault(
                    REQUEST_ID_HEADER, {"$ref": "#/components/headers/RequestId"}
                )
            operation["responses"] = dict(sorted(responses.items()))
    _drop_unused(doc, ("HTTPValidationError", "ValidationError"))
    return doc


def install_openapi(app: FastAPI) -> None:
    """Serve the post-processed document and the offline /docs and /redoc pages."""

    def openapi() -> dict[str, Any]:
        routes_version = app.router._get_routes_version()
        if app.openapi_schema is None or getattr(app.state, "openapi_version", None) != (
            routes_version
        ):
            app.openapi_schema = build_document(app)
            app.state.openapi_version = routes_version
        return app.openapi_schema

    app.openapi = openapi  # type: ignore[method-assign]
    app.mount(DOCS_ASSETS, StaticFiles(directory=ASSETS_DIR), name="docs-assets")
    openapi_url = app.openapi_url or "/openapi.json"
    redirect_url = "/docs/oauth2-redirect"

    @app.get("/docs", include_in_schema=False)
    async def swagger_ui() -> HTMLResponse:
        return get_swagger_ui_html(
            openapi_url=openapi_url,
            title=f"{app.title} - API",
            oauth2_redirect_url=redirect_url,
            swagger_js_url=f"{DOCS_ASSETS}/swagger-ui-bundle.js",
            swagger_css_url=f"{DOCS_ASSETS}/swagger-ui.css",
            swagger_favicon_url=f"{DOCS_ASSETS}/favicon.png",
            # No validator badge: Swagger UI would fetch it from validator.swagger.io.
            swagger_ui_parameters={"persistAuthorization": True, "validatorUrl": None},
        )

    @app.get(redirect_url, include_in_schema=False)
    async def swagger_ui_redirect() -> HTMLResponse:
        return get_swagger_ui_oauth2_redirect_html()

    @app.get("/redoc", include_in_schema=False)
    async def redoc() -> HTMLResponse:
        return get_redoc_html(
            openapi_url=openapi_url,
            title=f"{app.title} - API reference",
            redoc_js_url=f"{DOCS_ASSETS}/redoc.standalone.js",
            redoc_favicon_url=f"{DOCS_ASSETS}/favicon.png",
            with_google_fonts=False,
        )
