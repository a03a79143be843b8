"""The gate in front of the API: the key check first, then bounded bodies (pure ASGI).

For every path under /api/v1, before anything parses the query or the body:

- an API key in the query string (api_key, key, token, access_token) is refused with 400,
  and the query string is blanked out of the scope so the access log never shows it;
- a missing, unknown or revoked Bearer key is refused with 401, so a caller without a
  key learns nothing about a route's parameters (scopes stay in the route dependencies);
  the key is looked up in a short read transaction of its own, or found in the key
  cache (service/keys/cache.py: trusted for ``key_cache_s`` seconds) without a thread hop.

For every path, a body longer than ``max_body_bytes`` is refused with 413: at once when
its Content-Length says so, else while it streams in (the receive channel counts bytes),
so it is never read in full. At most db_pool_size + db_max_overflow requests are let in at
once; the others queue in the event loop (no connection or thread held). Key use is written to ``api_keys.last_used_at`` after the
answer has gone out (service/keys/usage.py), never inside the request's transaction.
"""

from __future__ import annotations

import asyncio
import logging
from urllib.parse import parse_qsl, urlencode

import anyio
import anyio.to_thread
from fastapi import FastAPI
from starlette.types import ASGIApp, Message, Receive, Scope, Send

from service.api.errors import BodyTooLarge, busy_problem, is_busy_error, problem
from service.config import get_settings
from service.db.session import short_session
from service.keys import service as keys
from service.keys.usage import recorder

log = logging.getLogger(__name__)

API_PREFIX = "/api/v1"
# Query parameter names that carry credentials in other APIs; never accepted here.
KEY_PARAMS = frozenset({"api_key", "key", "token", "access_token"})
REDACTED = "REDACTED"
# The liveness probe touches no database: it must answer even while requests queue here.
UNGATED = frozenset({"/healthz"})


def bearer_token(scope: Scope) -> str | None:
    """The token of an 'Authorization: Bearer <token>' header, or None."""
    for name, value in scope["headers"]:
        if name.lower() == b"authorization":
            scheme, _, token = value.decode("latin-1").partition(" ")
            if scheme.lower() == "bearer" and token.strip():
                return token.strip()
            return None
    return None


def _content_length(scope: Scope) -> int | None:
    for name, value in scope["headers"]:
        if name.lower() == b"content-length":
            try:
                return int(value)
            except ValueError:
                return None  # the server refuses a malformed header before we see it
    return None


def key_in_query(scope: Scope) -> list[str]:
    """Names of query parameters that look like credentials; blanks their values in scope."""
    pairs = parse_qsl(scope.get("query_string", b"").decode("latin-1"), keep_blank_values=True)
    found = sorted({k for k, _ in pairs if k.lower() in KEY_PARAMS})
    if found:
        # The access log prints the scope's query string: leave no secret in it.
        redacted = [(k, REDACTED if k.lower() in KEY_PARAMS else v) for k, v in pairs]
        scope["query_string"] = urlencode(redacted).encode("latin-1")
    return found


def _is_api(path: str) -> bool:
    return path == API_PREFIX or path.startswith(API_PREFIX + "/")


class GateMiddleware:
    """Key check, key-in-query refusal and body limit, before any route code runs."""

    def __init__(self, app: ASGIApp) -> None:
        self.app = app
        self._slots: tuple[asyncio.AbstractEventLoop, anyio.Semaphore] | None = None

    def _semaphore(self) -> anyio.Semaphore:
        """The slots of the running event loop (a test client runs one loop per client)."""
        loop = asyncio.get_running_loop()
        if self._slots is None or self._slots[0] is not loop:
            settings = get_settings()
            self._slots = (loop, anyio.Semaphore(settings.db_pool_size + settings.db_max_overflow))
        return self._slots[1]

    async def __call__(self, scope: Scope, receive: Receive, send: Send) -> None:
        """Answer 400/401/413 itself, or pass the request on with a counting receive."""
        if scope["type"] != "http" or scope["path"] in UNGATED:
            await self.app(scope, receive, send)
            return
        path = scope["path"]
        limit = get_settings().max_body_bytes
        # Admission: at most as many requests inside as the pool has connections. The rest
        # wait here, holding neither a connection nor a worker thread, so a request that
        # holds SQLite's write lock always gets the thread it needs to finish.
        async with self._semaphore():
            if _is_api(path) and not _cached_pass(scope):
                # The lookup blocks on the pool and the database: never on the event loop.
                refusal = await anyio.to_thread.run_sync(self._refusal, scope)
                if refusal is not None:
                    await refusal(scope, receive, send)
                    return
            length = _content_length(scope)
            if length is not None and length > limit:
                await _too_large(path, limit)(scope, receive, send)
                return
            await self._pass_on(scope, receive, send, limit)
            if recorder.has_due():
                # After the answer went out: record key use in a short write of its own.
                app = scope.get("app")
                opener = lambda: short_session(app, write=False)  # noqa: E731
                await anyio.to_thread.run_sync(recorder.flush, opener)

    def _refusal(self, scope: Scope) -> ASGIApp | None:
        """The 400 / 401 / 503 answer for an API request, or None when the key is good."""
        path = scope["path"]
        in_query = key_in_query(scope)
        if in_query:
            names = ", ".join(in_query)
            return problem(
                400,
                "API key in the URL",
                f"Send the API key as 'Authorization: Bearer <key>', never in the URL "
                f"(query parameter {names}). Treat a key sent in a URL as leaked: revoke it.",
                kind="key-in-query",
                instance=path,
                errors=[
                    {"field": k, "in": "query", "message": "credentials in URL"} for k in in_query
                ],
            )
        token = bearer_token(scope)
        if token is None:
            return _unauthorized(path, "Send an API key as 'Authorization: Bearer <key>'.")
        app = scope.get("app")
        try:
            key = keys.active_key(lambda: short_session(app, write=False), token)
        except Exception as exc:
            if is_busy_error(exc):
                return busy_problem(path, exc)
            raise
        if key is None:
            return _unauthorized(path, "The API key is unknown or revoked.")
        scope.setdefault("state", {})["api_key_id"] = key.id  # for the request's log line
        return None

    async def _pass_on(self, scope: Scope, receive: Receive, send: Send, limit: int) -> None:
        """Run the app with a receive that stops a body at the limit; answer 413 if it did."""
        received = 0
        started = False

        async def counting_receive() -> Message:
            nonlocal received
            message = await receive()
            if message["type"] == "http.request":
                received += len(message.get("body", b""))
                if received > limit:
                    raise BodyTooLarge(limit)
            return message

        async def watching_send(message: Message) -> None:
            nonlocal started
            if message["type"] == "http.response.start":
                started = True
            await send(message)

        try:
            await self.app(scope, counting_receive, watching_send)
        except BodyTooLarge:
            # Raised outside the app's own handlers (the idempotency spool, for one).
            if started:
                raise
            await _too_large(scope["path"], limit)(scope, receive, send)


def _cached_pass(scope: Scope) -> bool:
    """True when the request has no key in its query and a key the cache holds as active."""
    if scope.get("query_string") and any(
        k.lower() in KEY_PARAMS
        for k, _ in parse_qsl(scope["query_string"].decode("latin-1"), keep_blank_values=True)
    ):
        return False
    token = bearer_token(scope)
    key = keys.cached_key(token) if token is not None else None
    if key is None:
        return False
    scope.setdefault("state", {})["api_key_id"] = key.id  # for the request's log line
    return True


def _unauthorized(path: str, detail: str) -> ASGIApp:
    return problem(
        401,
        "Not authenticated",
        detail,
        kind="not-authenticated",
        instance=path,
        headers={"WWW-Authenticate": "Bearer"},
    )


def _too_large(path: str, limit: int) -> ASGIApp:
    return problem(
        413,
        "Too large",
        f"The request body is larger than the limit of {limit} bytes.",
        kind="too-large",
        instance=path,
    )


def install_gate(app: FastAPI) -> None:
    """Add the gate as the outermost middleware (before Idempotency-Key: install it last)."""
    app.add_middleware(GateMiddleware)
