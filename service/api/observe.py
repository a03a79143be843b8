"""Request ids, request metrics and one JSON log line per request (pure ASGI, outermost).

Every answer carries ``X-Request-ID``: the caller's when it is sane, else a new one; the
same id is in the request's log line and in any problem+json body. The log line names the
method, the route template (``/api/v1/sites/{site_id}``, never the path with its ids or
query), the status, the latency in milliseconds and the id of the API key used (never the
key itself).
"""

from __future__ import annotations

import json
import logging
import sys
import time
from datetime import UTC, datetime
from typing import Any

from fastapi import FastAPI
from starlette.routing import Match
from starlette.types import ASGIApp, Message, Receive, Scope, Send

from service.api import request_id
from service.api.metrics import observe_request
from service.config import Settings

access_log = logging.getLogger("lampkeeper.access")
UNMATCHED = "unmatched"  # requests no route matched: one label, not one per path tried
# LogRecord attributes that are not extra fields of ours.
_RECORD_FIELDS = frozenset(vars(logging.makeLogRecord({}))) | {"message", "asctime"}


class JsonFormatter(logging.Formatter):
    """One JSON object per log record: time, level, logger, message and any extra fields."""

    def format(self, record: logging.LogRecord) -> str:
        """The record as a single line of JSON."""
        line: dict[str, Any] = {
            "time": datetime.fromtimestamp(record.created, UTC).isoformat(timespec="milliseconds"),
            "level": record.levelname.lower(),
            "logger": record.name,
            "message": record.getMessage(),
        }
        rid = request_id.current.get()
        if rid is not None:
            line["request_id"] = rid
        for key, value in vars(record).items():
            if key not in _RECORD_FIELDS and not key.startswith("_"):
                line[key] = value
        if record.exc_info:
            line["exception"] = self.formatException(record.exc_info)
        return json.dumps(line, default=str)


def configure_logging(settings: Settings) -> None:
    """Root logging at the configured level, as JSON lines or plain text, on stderr."""
    root = logging.getLogger()
    root.setLevel(settings.log_level.upper())
    for handler in root.handlers:
        if getattr(handler, "lampkeeper", False):
            root.removeHandler(handler)  # a second app in one process replaces ours
    handler = logging.StreamHandler(sys.stderr)
    handler.lampkeeper = True  # type: ignore[attr-defined]
    if settings.log_format == "json":
        handler.setFormatter(JsonFormatter())
    else:
        handler.setFormatter(logging.Formatter("%(asctime)s %(levelname)s %(name)s %(message)s"))
    root.addHandler(handler)


# (app, method, path) -> template, for the paths seen lately; matching every route again
# per request cost as much as a small route's own work. Bounded: ids make paths many.
_TEMPLATES: dict[tuple[int, str, str], str] = {}
MAX_TEMPLATES = 4096


def route_template(scope: Scope) -> str:
    """The full path template of the route that matches the request (prefix included).

    Matched again here rather than read from scope["route"]: that is the route as its
    router declared it, without the /api/v1 prefix of the include.
    """
    app = scope.get("app")
    router = getattr(app, "router", None)
    if router is None:
        return UNMATCHED
    key = (id(app), scope.get("method", "GET"), scope.get("path", ""))
    found = _TEMPLATES.get(key)
    if found is None:
        found = _match_template(router, scope)
        if len(_TEMPLATES) >= MAX_TEMPLATES:
            _TEMPLATES.clear()
        _TEMPLATES[key] = found
    return found


def _match_template(router: Any, scope: Scope) -> str:
    """Match the routes in order: the first full match, else the first path-only match."""
    probe = {**scope, "method": scope.get("method", "GET")}
    from fastapi import routing

    partial = UNMATCHED
    for context in routing.iter_route_contexts(router.routes):
        match, _ = context.matches(probe)
        template = str(getattr(context, "path_format", None) or getattr(context, "path", ""))
        if match is Match.FULL:
            return template
        if match is Match.PARTIAL and partial == UNMATCHED:
            partial = template  # the path matched, the method did not (405)
    return partial


class ObserveMiddleware:
    """X-Request-ID in and out, the request metrics and the access log line."""

    def __init__(self, app: ASGIApp) -> None:
        self.app = app

    async def __call__(self, scope: Scope, receive: Receive, send: Send) -> None:
        """Run the request with its id set; count and log it once the answer has gone."""
        if scope["type"] != "http":
            await self.app(scope, receive, send)
            return
        raw = None
        for name, value in scope["headers"]:
            if name.lower() == b"x-request-id":
                raw = value.decode("latin-1")
                break
        rid = request_id.accept_or_make(raw)
        token = request_id.current.set(rid)
        scope.setdefault("state", {})["request_id"] = rid
        status = 500
        started = time.perf_counter()

        async def send_with_id(message: Message) -> None:
            nonlocal status
            if message["type"] == "http.response.start":
                status = message["status"]
                headers = [
                    (k, v) for k, v in message.get("headers", []) if k.lower() != b"x-request-id"
                ]
                headers.append((b"x-request-id", rid.encode("latin-1")))
                message = {**message, "headers": headers}
            await send(message)

        try:
            await self.app(scope, receive, send_with_id)
        finally:
            seconds = time.perf_counter() - started
            route = route_template(scope)
            method = scope.get("method", "GET")
            observe_request(method, route, status, seconds)
            access_log.info(
                "%s %s %s",
                method,
                route,
                status,
                extra={
                    "method": method,
                    "route": route,
                    "status": status,
                    "duration_ms": round(seconds * 1000, 2),
                    "key_id": scope.get("state", {}).get("api_key_id"),
                },
            )
            request_id.current.reset(token)


def install_observe(app: FastAPI) -> None:
    """Add the middleware outermost (install it after every other middleware)."""
    app.add_middleware(ObserveMiddleware)
