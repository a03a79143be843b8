"""Idempotency-Key on POST/PUT/PATCH/DELETE /api/v1/...: a pure ASGI middleware replaying answers.

Per (API key, method, path, Idempotency-Key) the first request claims a row in
``idempotency_keys`` (the unique constraint decides between concurrent requests) in its
own short transaction, runs, and stores its status, Location / Content-Type / ETag and
body. The same key with the same body (SHA-256) replays that answer; with another body it
is a 422; while the first is still running it is a 409. A claim whose process died is
abandoned after ``idempotency_inflight_s`` and the next retry runs again. 5xx answers and
4xx that may change on retry (401, 403, 408, 425, 429) are not stored: the claim is dropped.
The request body is spooled (memory, then a temporary file) while it is hashed, so a
large upload is held once and replayed to the route in chunks. Every database step runs in
a worker thread (anyio.to_thread), never on the event loop, so a slow claim or a busy
database holds up only its own request.
"""

from __future__ import annotations

import hashlib
import json
import logging
import tempfile
from collections.abc import Callable
from contextlib import AbstractContextManager
from datetime import timedelta
from typing import Any

import anyio.to_thread
from fastapi import FastAPI
from sqlalchemy import delete, select
from sqlalchemy.exc import IntegrityError
from sqlalchemy.orm import Session
from starlette.types import ASGIApp, Message, Receive, Scope, Send

from service.api import request_id
from service.api.errors import PROBLEM_MEDIA_TYPE, busy_problem, is_busy_error
from service.api.preconditions import install_precondition_handlers
from service.config import get_settings
from service.db.base import utcnow
from service.db.session import short_session
from service.idempotency.models import IdempotencyKey
from service.keys import service as keys

log = logging.getLogger(__name__)

HEADER = "idempotency-key"
METHODS = frozenset({"POST", "PUT", "PATCH", "DELETE"})
KEPT_HEADERS = ("location", "content-type", "etag")
NOT_FINAL = frozenset({401, 403, 408, 425, 429})
SPOOL_IN_MEMORY = 1 << 20  # bytes of body kept in memory before spilling to disk
CHUNK = 1 << 16  # bytes per replayed request chunk
MAX_KEY_LENGTH = 255

SessionOpener = Callable[[], AbstractContextManager[Session]]


class Problem(Exception):
    """An answer the middleware gives itself (409 in flight, 422 reused key)."""

    def __init__(self, status: int, title: str, detail: str) -> None:
        super().__init__(detail)
        self.status, self.title, self.detail = status, title, detail


def _problem_message(path: str, exc: Problem) -> tuple[dict[str, Any], bytes]:
    """The ASGI start message and body of a problem+json answer naming the header."""
    kind = "idempotency-in-flight" if exc.status == 409 else "idempotency-key-reused"
    body = {
        "type": f"/problems/{kind}",
        "title": exc.title,
        "status": exc.status,
        "detail": exc.detail,
        "instance": path,
        "errors": [{"field": "Idempotency-Key", "in": "header", "message": exc.detail}],
    }
    if request_id.current.get() is not None:
        body["request_id"] = request_id.current.get()
    raw = json.dumps(body).encode()
    headers = [
        (b"content-type", PROBLEM_MEDIA_TYPE.encode()),
        (b"content-length", b"%d" % len(raw)),
    ]
    return {"type": "http.response.start", "status": exc.status, "headers": headers}, raw


class IdempotencyMiddleware:
    """Claims, replays and stores POST answers keyed by the Idempotency-Key header."""

    def __init__(self, app: ASGIApp, prefix: str = "/api/v1") -> None:
        self.app = app
        self.prefix = prefix

    def _opener(self, scope: Scope) -> SessionOpener:
        """Short transactions: the app's session override (tests) or a fresh session."""
        fastapi_app = scope.get("app")
        # SQLite: BEGIN IMMEDIATE (write=True), no lock upgrade mid-way.
        return lambda: short_session(fastapi_app, write=True)

    async def __call__(self, scope: Scope, receive: Receive, send: Send) -> None:
        """Pass through everything but writes under the prefix that carry the header."""
        if scope["type"] != "http" or scope["method"] not in METHODS:
            await self.app(scope, receive, send)
            return
        headers = {k.decode("latin-1").lower(): v.decode("latin-1") for k, v in scope["headers"]}
        key = headers.get(HEADER)
        if key is None or not scope["path"].startswith(self.prefix + "/"):
            await self.app(scope, receive, send)
            return
        opener = self._opener(scope)
        run = anyio.to_thread.run_sync
        try:
            api_key_id = await run(_api_key_id, opener, headers.get("authorization", ""))
        except Exception as exc:
            if not is_busy_error(exc):
                raise
            await busy_problem(scope["path"], exc)(scope, receive, send)
            return
        if api_key_id is None:  # the route answers 401 itself; nothing to remember
            await self.app(scope, receive, send)
            return
        with tempfile.SpooledTemporaryFile(max_size=SPOOL_IN_MEMORY) as spool:
            digest = await _spool(receive, spool)
            ident = (api_key_id, scope["method"], scope["path"], key.strip())
            try:
                if not key.strip() or len(key) > MAX_KEY_LENGTH:
                    raise Problem(422, "Invalid value", "Idempotency-Key must be 1-255 characters.")
                stored = await run(claim, opener, ident, digest)
            except Problem as exc:
                start, raw = _problem_message(scope["path"], exc)
                await send(start)
                await send({"type": "http.response.body", "body": raw})
                return
            except Exception as exc:
                if not is_busy_error(exc):
                    raise
                # A lost or busy database while claiming: nothing ran, nothing is stored.
                await busy_problem(scope["path"], exc)(scope, receive, send)
                return
            if stored is not None:
                await _replay(send, stored)
                return
            spool.seek(0)
            await self._run(scope, spool, send, opener, ident)

    async def _run(
        self, scope: Scope, spool: Any, send: Send, opener: SessionOpener, ident: tuple[Any, ...]
    ) -> None:
        """Run the route on the spooled body, pass its answer on, then store or drop the claim."""
        start: dict[str, Any] = {}
        chunks: list[bytes] = []
        done = False

        async def replay_receive() -> Message:
            nonlocal done
            if done:
                return {"type": "http.disconnect"}
            data = spool.read(CHUNK)
            more = len(data) == CHUNK
            done = not more
            return {"type": "http.request", "body": data, "more_body": more}

        async def capture_send(message: Message) -> None:
            if message["type"] == "http.response.start":
                start.update(message)
            elif message["type"] == "http.response.body":
                chunks.append(message.get("body", b""))
            await send(message)

        try:
            await self.app(scope, replay_receive, capture_send)
        except BaseException:
            await anyio.to_thread.run_sync(release, opener, ident)
            raise
        status = int(start.get("status", 500))
        if status >= 500 or status in NOT_FINAL:
            await anyio.to_thread.run_sync(release, opener, ident)
            return
        kept = {
            k.decode("latin-1").lower(): v.decode("latin-1")
            for k, v in start.get("headers", [])
            if k.decode("latin-1").lower() in KEPT_HEADERS
        }
        try:
            await anyio.to_thread.run_sync(finish, opener, ident, status, kept, b"".join(chunks))
        except Exception as exc:
            if not is_busy_error(exc):
                raise
            # The answer has gone out; the claim lapses after idempotency_inflight_s.
            log.warning("could not store the answer for %s: %s", scope["path"], exc)


async def _spool(receive: Receive, spool: Any) -> str:
    """Copy the request body into the spool, hashing it on the way; the hex SHA-256."""
    sha = hashlib.sha256()
    more = True
    while more:
        message = await receive()
        if message["type"] == "http.disconnect":
            break
        data = message.get("body", b"")
        sha.update(data)
        spool.write(data)
        more = message.get("more_body", False)
    return sha.hexdigest()


async def _replay(send: Send, row: IdempotencyKey) -> None:
    """Send a stored answer again, marked as a replay."""
    body = row.body or b""
    headers = [(k.encode(), v.encode()) for k, v in (row.headers or {}).items()]
    headers += [(b"content-length", b"%d" % len(body)), (b"idempotent-replayed", b"true")]
    await send({"type": "http.response.start", "status": row.status, "headers": headers})
    await send({"type": "http.response.body", "body": body})


def _api_key_id(opener: SessionOpener, authorization: str) -> int | None:
    """The id of the active key in a Bearer header, or None."""
    scheme, _, token = authorization.partition(" ")
    if scheme.lower() != "bearer" or not token.strip():
        return None
    key = keys.active_key(opener, token.strip())
    return None if key is None else key.id


def _where(ident: tuple[Any, ...]) -> Any:
    """The unique-constraint columns of one key."""
    api_key_id, method, route, key = ident
    return (
        (IdempotencyKey.api_key_id == api_key_id)
        & (IdempotencyKey.method == method)
        & (IdempotencyKey.route == route)
        & (IdempotencyKey.idem_key == key)
    )


def claim(opener: SessionOpener, ident: tuple[Any, ...], digest: str) -> IdempotencyKey | None:
    """Claim a key for this request (None) or return its stored answer; Problem otherwise."""
    settings = get_settings()
    now = utcnow()
    with opener() as session:
        # Purge on write: expired answers and claims abandoned by a dead process.
        session.execute(delete(IdempotencyKey).where(IdempotencyKey.expires_at < now))
        row = session.scalar(select(IdempotencyKey).where(_where(ident)))
        if row is not None:
            return _existing(row, digest)
        api_key_id, method, route, key = ident
        inflight = timedelta(seconds=settings.idempotency_inflight_s)
        row = IdempotencyKey(
            api_key_id=api_key_id, method=method, route=route, idem_key=key,
            body_sha256=digest, created_at=now, expires_at=now + inflight,
        )  # fmt: skip
        try:
            with session.begin_nested():
                session.add(row)
        except IntegrityError:
            # Another request claimed it between our read and insert.
            raise Problem(409, "Conflict", _IN_FLIGHT) from None
    return None


_IN_FLIGHT = (
    "A request with this Idempotency-Key is still being processed; retry after it finishes."
)


def _existing(row: IdempotencyKey, digest: str) -> IdempotencyKey:
    """A stored answer to replay, or the Problem a reused key deserves."""
    if row.body_sha256 != digest:
        raise Problem(
            422,
            "Invalid value",
            "This Idempotency-Key was already used with a different request body; "
            "use a new key for a new request.",
        )
    if row.status is None:
        raise Problem(409, "Conflict", _IN_FLIGHT)
    return row


def finish(
    opener: SessionOpener, ident: tuple[Any, ...], status: int, headers: dict[str, str], body: bytes
) -> None:
    """Store the answer on the claim and keep it for the replay period."""
    ttl = timedelta(hours=get_settings().idempotency_ttl_h)
    with opener() as session:
        row = session.scalar(select(IdempotencyKey).where(_where(ident)))
        if row is None:  # the claim expired and was purged meanwhile: store nothing
            return
        row.status, row.headers, row.body = status, headers, body
        row.expires_at = utcnow() + ttl
        session.flush()


def release(opener: SessionOpener, ident: tuple[Any, ...]) -> None:
    """Drop a claim so a retry runs again (5xx, non-final 4xx, a crash in the route)."""
    with opener() as session:
        session.execute(
            delete(IdempotencyKey).where(_where(ident) & IdempotencyKey.status.is_(None))
        )


def install_retries(app: FastAPI) -> None:
    """Idempotency-Key replays, and the 304 / stale-version handlers of preconditions.py."""
    app.add_middleware(IdempotencyMiddleware)
    install_precondition_handlers(app)
