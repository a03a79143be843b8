"""Bodies over max_body_bytes get 413 problem+json, without being read in full."""

from __future__ import annotations

import asyncio
from collections.abc import AsyncIterator, Iterator
from typing import Any

import httpx
import pytest
from fastapi import FastAPI
from fastapi.testclient import TestClient

from service.api import gate
from service.config import get_settings
from tests.api.test_bad_input_tour import SITE, assert_problem

LIMIT = 4096  # bytes: the tiny limit these tests set
CHUNK = 1024


@pytest.fixture()
def tiny_limit(monkeypatch: pytest.MonkeyPatch) -> Iterator[int]:
    """max_body_bytes = LIMIT for one test (the settings are cached: clear them around it)."""
    monkeypatch.setenv("LAMPKEEPER_MAX_BODY_BYTES", str(LIMIT))
    get_settings.cache_clear()
    assert get_settings().max_body_bytes == LIMIT
    try:
        yield LIMIT
    finally:
        monkeypatch.delenv("LAMPKEEPER_MAX_BODY_BYTES")
        get_settings.cache_clear()


class Chunks:
    """A chunked request body (no Content-Length) that counts how much was taken."""

    def __init__(self, count: int) -> None:
        self.count, self.taken = count, 0

    async def __aiter__(self) -> AsyncIterator[bytes]:
        for _ in range(self.count):
            self.taken += 1
            yield b"x" * CHUNK


def stream_post(app: FastAPI, path: str, chunks: Chunks, headers: dict[str, str]) -> httpx.Response:
    """POST a chunked body through httpx's ASGI transport, which pulls chunks as the app asks
    (the TestClient reads a whole body first, so it cannot show where reading stopped)."""

    async def go() -> httpx.Response:
        transport = httpx.ASGITransport(app=app)
        async with httpx.AsyncClient(transport=transport, base_url="http://testserver") as c:
            return await c.post(path, content=chunks, headers=headers)

    return asyncio.run(go())


def test_default_limit_is_256_mib() -> None:
    assert get_settings().max_body_bytes == 256 * 1024 * 1024


def test_content_length_over_the_limit_is_413(
    client: TestClient, writer: dict[str, str], tiny_limit: int
) -> None:
    body = b"fixture_tag,burn_hours\n" + b"A-1,10\n" * 1000
    r = client.post(
        "/api/v1/burn-hours/bulk", content=body, headers={**writer, "Content-Type": "text/csv"}
    )
    problem = assert_problem(r, 413)
    assert problem["type"] == "/problems/too-large" and str(tiny_limit) in problem["detail"]


def test_small_bodies_still_pass(
    client: TestClient, writer: dict[str, str], tiny_limit: int
) -> None:
    r = client.post("/api/v1/sites", json=SITE, headers=writer)
    assert r.status_code == 201, r.text


def test_chunked_body_over_the_limit_is_413_before_it_is_all_read(
    app: FastAPI, client: TestClient, writer: dict[str, str], tiny_limit: int
) -> None:
    chunks = Chunks(1000)  # 1 MiB in 1 KiB chunks, no Content-Length
    headers = {**writer, "Content-Type": "text/csv"}
    r = stream_post(app, "/api/v1/burn-hours/bulk", chunks, headers)
    problem = assert_problem(r, 413)
    assert problem["type"] == "/problems/too-large"
    # Stopped at the first chunk past the limit, not at the end of the body.
    assert chunks.taken <= tiny_limit // CHUNK + 2


def test_chunked_json_body_over_the_limit_is_413(
    app: FastAPI, client: TestClient, writer: dict[str, str], tiny_limit: int
) -> None:
    chunks = Chunks(100)
    r = stream_post(app, "/api/v1/sites", chunks, {**writer, "Content-Type": "application/json"})
    assert_problem(r, 413)
    assert chunks.taken <= tiny_limit // CHUNK + 2


def test_chunked_body_through_the_idempotency_spool_is_413(
    app: FastAPI, client: TestClient, writer: dict[str, str], tiny_limit: int
) -> None:
    chunks = Chunks(1000)
    headers = {**writer, "Content-Type": "text/csv", "Idempotency-Key": "big-1"}
    r = stream_post(app, "/api/v1/burn-hours/bulk", chunks, headers)
    assert_problem(r, 413)
    assert chunks.taken <= tiny_limit // CHUNK + 2
    # The claim was dropped with the failed request: a retry runs again (small body now).
    r = client.post("/api/v1/sites", json=SITE, headers={**writer, "Idempotency-Key": "big-1"})
    assert r.status_code == 201, r.text


def test_no_key_and_a_big_body_is_401_first(
    app: FastAPI, client: TestClient, tiny_limit: int
) -> None:
    chunks = Chunks(1000)
    r = stream_post(app, "/api/v1/burn-hours/bulk", chunks, {"Content-Type": "text/csv"})
    assert_problem(r, 401)
    assert chunks.taken <= 1


def test_gate_answers_413_when_a_route_body_streams_past_the_limit(tiny_limit: int) -> None:
    """A plain ASGI app reading its body: the gate's receive stops it and answers 413."""
    sent: list[dict[str, Any]] = []
    messages = iter(
        [{"type": "http.request", "body": b"y" * CHUNK, "more_body": True} for _ in range(50)]
    )
    taken = 0

    async def receive() -> dict[str, Any]:
        nonlocal taken
        taken += 1
        return next(messages)

    async def send(message: dict[str, Any]) -> None:
        sent.append(message)

    async def reads_everything(scope: Any, rcv: Any, snd: Any) -> None:
        while (await rcv()).get("more_body"):
            pass

    scope = {
        "type": "http",
        "method": "POST",
        "path": "/upload",
        "headers": [],
        "query_string": b"",
    }
    asyncio.run(gate.GateMiddleware(reads_everything)(scope, receive, send))
    assert sent[0]["type"] == "http.response.start" and sent[0]["status"] == 413
    assert taken == tiny_limit // CHUNK + 1


def test_requests_beyond_the_pool_wait_at_the_gate(monkeypatch: pytest.MonkeyPatch) -> None:
    """With one pooled connection, a second request enters only when the first is done."""
    monkeypatch.setenv("LAMPKEEPER_DB_POOL_SIZE", "1")
    monkeypatch.setenv("LAMPKEEPER_DB_MAX_OVERFLOW", "0")
    get_settings.cache_clear()
    inside: list[str] = []
    events: list[str] = []

    async def scenario() -> None:
        release = asyncio.Event()
        first_in = asyncio.Event()

        async def app(scope: Any, receive: Any, send: Any) -> None:
            inside.append(scope["path"])
            events.append(f"in {scope['path']}")
            if scope["path"] == "/first":
                first_in.set()
                await release.wait()
            events.append(f"out {scope['path']}")

        gated = gate.GateMiddleware(app)

        async def call(path: str) -> None:
            scope = {"type": "http", "method": "GET", "path": path, "headers": []}
            scope["query_string"] = b""

            async def receive() -> dict[str, Any]:
                return {"type": "http.request", "body": b""}

            async def send(_m: Any) -> None:
                return None

            await gated(scope, receive, send)

        first = asyncio.create_task(call("/first"))
        await first_in.wait()
        second = asyncio.create_task(call("/second"))
        for _ in range(20):  # let the second run as far as it can
            await asyncio.sleep(0)
        assert inside == ["/first"]  # it waits at the gate
        release.set()
        await asyncio.gather(first, second)

    try:
        asyncio.run(scenario())
    finally:
        monkeypatch.undo()
        get_settings.cache_clear()
    assert events == ["in /first", "out /first", "in /second", "out /second"]


def test_liveness_probe_skips_the_queue(monkeypatch: pytest.MonkeyPatch) -> None:
    """/healthz answers even when every slot is taken."""
    monkeypatch.setenv("LAMPKEEPER_DB_POOL_SIZE", "1")
    monkeypatch.setenv("LAMPKEEPER_DB_MAX_OVERFLOW", "0")
    get_settings.cache_clear()
    seen: list[str] = []

    async def scenario() -> None:
        release = asyncio.Event()
        busy = asyncio.Event()

        async def app(scope: Any, receive: Any, send: Any) -> None:
            seen.append(scope["path"])
            if scope["path"] == "/slow":
                busy.set()
                await release.wait()

        gated = gate.GateMiddleware(app)

        async def call(path: str) -> None:
            scope = {"type": "http", "method": "GET", "path": path, "headers": []}
            scope["query_string"] = b""

            async def receive() -> dict[str, Any]:
                return {"type": "http.request", "body": b""}

            async def send(_m: Any) -> None:
                return None

            await gated(scope, receive, send)

        slow = asyncio.create_task(call("/slow"))
        await busy.wait()
        await call("/healthz")  # would wait forever behind /slow if it queued
        assert seen == ["/slow", "/healthz"]
        release.set()
        await slow

    try:
        asyncio.run(scenario())
    finally:
        monkeypatch.undo()
        get_settings.cache_clear()
