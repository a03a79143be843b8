"""Domain errors rendered as RFC 9457 problem+json; the error classes live in service.errors."""

from __future__ import annotations

import logging
from typing import Any

from fastapi import FastAPI, HTTPException, Request
from fastapi.exceptions import RequestValidationError
from fastapi.responses import JSONResponse
from sqlalchemy.exc import DBAPIError, DisconnectionError, IntegrityError
from sqlalchemy.exc import TimeoutError as PoolTimeout
from starlette.exceptions import HTTPException as StarletteHTTPException

from service.api import request_id
from service.errors import (  # re-exported: routers and services import them from here
    Conflict,
    DomainError,
    Forbidden,
    Invalid,
    NotFound,
    TooLarge,
    Unauthorized,
)

__all__ = [
    "HANDLERS",
    "LOCATIONS",
    "PROBLEM_MEDIA_TYPE",
    "TYPE_BASE",
    "BodyTooLarge",
    "Conflict",
    "DomainError",
    "Forbidden",
    "Invalid",
    "NotFound",
    "TooLarge",
    "Unauthorized",
    "busy_problem",
    "install_error_handlers",
    "is_busy_error",
    "problem",
    "validation_errors",
]

log = logging.getLogger(__name__)

PROBLEM_MEDIA_TYPE = "application/problem+json"
# Our own problem-type URIs; relative references are allowed by RFC 9457 §3.1.1.
TYPE_BASE = "/problems/"


class BodyTooLarge(HTTPException):
    """A request body beyond max_body_bytes, raised while it streams in (413).

    An HTTPException, not a DomainError: FastAPI turns any other error raised while it
    reads a body into a 400.
    """

    kind = "too-large"

    def __init__(self, limit: int) -> None:
        super().__init__(413, f"The request body is larger than the limit of {limit} bytes.")


def problem(
    status: int,
    title: str,
    detail: str,
    *,
    kind: str,
    instance: str | None = None,
    headers: dict[str, str] | None = None,
    **members: Any,
) -> JSONResponse:
    """Build a problem+json response."""
    body: dict[str, Any] = {"type": TYPE_BASE + kind, "title": title, "status": status}
    body["detail"] = detail
    if instance:
        body["instance"] = instance
    body.update({k: v for k, v in members.items() if v is not None})
    rid = request_id.current.get()
    if rid is not None:
        body.setdefault("request_id", rid)  # so a caller's report names the log line
    return JSONResponse(body, status_code=status, media_type=PROBLEM_MEDIA_TYPE, headers=headers)


# Where a request's field can be; `in` of every errors[] item is one of them.
LOCATIONS = ("body", "query", "path", "header")


def _field_name(loc: tuple[Any, ...] | list[Any]) -> str:
    # Drop the "body"/"query"/"path" prefix so the field reads as a client named it.
    parts = [str(p) for p in loc]
    if parts and parts[0] in LOCATIONS:
        parts = parts[1:]
    return ".".join(parts) or "body"


def validation_errors(raw: list[Any]) -> list[dict[str, Any]]:
    """Turn pydantic errors into {field, message, type, in} items."""
    items = []
    for err in raw:
        loc = err.get("loc", ())
        # A model validated by a service (not the request) has no location prefix: body.
        where = str(loc[0]) if loc and str(loc[0]) in LOCATIONS else "body"
        items.append(
            {
                "field": _field_name(loc),
                "in": where,
                "message": err.get("msg", "invalid"),
                "type": err.get("type", "value_error"),
            }
        )
    return items


# Driver messages of conditions that a retry resolves: lock and serialization clashes,
# lost or reset connections (the pool discards them), statement timeouts (SQLite,
# PostgreSQL via psycopg: AdminShutdown, QueryCanceled, SerializationFailure, ...).
_TRANSIENT = (
    "database is locked",
    "deadlock detected",
    "could not serialize access",
    "terminating connection",
    "server closed the connection",
    "connection reset",
    "connection refused",
    "connection is closed",
    "the connection is lost",
    "consuming input failed",
    "canceling statement due to statement timeout",
    "canceling statement due to lock timeout",
)
# SQLSTATE classes and codes that mean "try again": connection exceptions (08),
# serialization failure and deadlock (40001, 40P01), admin shutdown (57P01-57P03),
# query cancelled by a timeout (57014), lock not available (55P03).
_TRANSIENT_SQLSTATE = ("08", "40001", "40P01", "57P01", "57P02", "57P03", "57014", "55P03")


def _is_transient(exc: DBAPIError) -> bool:
    if exc.connection_invalidated:
        return True
    sqlstate = getattr(exc.orig, "sqlstate", None) or ""
    if sqlstate.startswith(_TRANSIENT_SQLSTATE):
        return True
    text = str(exc.orig).lower()
    return any(marker in text for marker in _TRANSIENT)


def is_busy_error(exc: BaseException) -> bool:
    """True for database errors that a retry resolves (pool, connection, lock, timeout)."""
    if isinstance(exc, (PoolTimeout, DisconnectionError)):
        return True
    return isinstance(exc, DBAPIError) and _is_transient(exc)


def busy_problem(path: str, exc: BaseException) -> JSONResponse:
    """The 503 + Retry-After answer to a busy or lost database."""
    log.warning("database busy on %s: %s", path, exc)
    return problem(
        503,
        "Busy",
        "The database was busy or its connection was lost; nothing was saved. Send it again.",
        kind="busy",
        instance=path,
        headers={"Retry-After": "1"},
    )


def _busy_response(request: Request, exc: Exception) -> JSONResponse:
    return busy_problem(request.url.path, exc)


async def _domain(request: Request, exc: DomainError) -> JSONResponse:
    headers = {"WWW-Authenticate": "Bearer"} if exc.status == 401 else None
    return problem(
        exc.status,
        exc.title,
        exc.detail,
        kind=exc.kind,
        instance=request.url.path,
        headers=headers,
        errors=exc.errors,
        **exc.extra,
    )


async def _validation(request: Request, exc: RequestValidationError) -> JSONResponse:
    errors = validation_errors(list(exc.errors()))
    fields = ", ".join(sorted({e["field"] for e in errors}))
    return problem(
        422,
        "Invalid request",
        f"The request has invalid or missing fields: {fields}.",
        kind="validation",
        instance=request.url.path,
        errors=errors,
    )


async def _http(request: Request, exc: StarletteHTTPException) -> JSONResponse:
    titles = {404: "Not found", 405: "Method not allowed", 413: "Too large"}
    return problem(
        exc.status_code,
        titles.get(exc.status_code, "Error"),
        str(exc.detail),
        kind=getattr(exc, "kind", f"http-{exc.status_code}"),
        instance=request.url.path,
        headers=getattr(exc, "headers", None),
    )


async def _integrity(request: Request, exc: IntegrityError) -> JSONResponse:
    # Services check clashes first; this catches races between two requests.
    log.info("integrity error on %s: %s", request.url.path, exc.orig)
    return problem(
        409,
        "Conflict",
        "The change clashes with stored data (a duplicate or a record still in use).",
        kind="conflict",
        instance=request.url.path,
    )


async def _busy(request: Request, exc: DBAPIError) -> JSONResponse:
    # SQLite refuses a write while another connection holds the write lock; PostgreSQL
    # aborts one side of a deadlock or a serialization clash, cancels a statement past
    # its timeout, or loses the connection. The request was rolled back: send it again.
    if not _is_transient(exc):
        return await _unexpected(request, exc)
    return _busy_response(request, exc)


async def _pool_exhausted(request: Request, exc: PoolTimeout) -> JSONResponse:
    # Every pooled connection stayed busy for the pool timeout.
    return _busy_response(request, exc)


async def _disconnected(request: Request, exc: DisconnectionError) -> JSONResponse:
    return _busy_response(request, exc)


async def _unexpected(request: Request, exc: Exception) -> JSONResponse:
    log.exception("unexpected error on %s", request.url.path)
    return problem(
        500,
        "Internal error",
        "The service failed to handle the request; nothing was saved.",
        kind="internal",
        instance=request.url.path,
    )


# Every error type we render, with its handler (FastAPI picks the nearest class in the MRO).
HANDLERS: tuple[tuple[type[Exception], Any], ...] = (
    (DomainError, _domain),
    (RequestValidationError, _validation),
    (StarletteHTTPException, _http),
    (IntegrityError, _integrity),
    (DBAPIError, _busy),
    (PoolTimeout, _pool_exhausted),
    (DisconnectionError, _disconnected),
    (Exception, _unexpected),
)


def install_error_handlers(app: FastAPI) -> None:
    """Register the handlers that render every error as problem+json."""
    for exc_type, handler in HANDLERS:
        app.add_exception_handler(exc_type, handler)
