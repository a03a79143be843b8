"""A GET issues no UPDATE, INSERT or DELETE: key use is written apart, once a minute."""

from __future__ import annotations

from collections.abc import Callable, Iterator
from typing import Any

import pytest
from fastapi.testclient import TestClient
from sqlalchemy import Engine, event, select
from sqlalchemy.orm import Session

from service.keys.models import ApiKey
from service.keys.usage import recorder
from tests.api.test_bad_input_tour import SITE

WRITES = ("insert", "update", "delete")


class Writes:
    """Counts the writing statements the engine sends (SQLAlchemy before_cursor_execute)."""

    def __init__(self) -> None:
        self.statements: list[str] = []

    def __call__(self, _conn: Any, _cursor: Any, statement: str, *_args: Any) -> None:
        if statement.lstrip().lower().startswith(WRITES):
            self.statements.append(statement)

    def take(self) -> list[str]:
        taken, self.statements = self.statements, []
        return taken


@pytest.fixture()
def writes(engine: Engine) -> Iterator[Writes]:
    counter = Writes()
    event.listen(engine, "before_cursor_execute", counter)
    try:
        yield counter
    finally:
        event.remove(engine, "before_cursor_execute", counter)


@pytest.fixture()
def frozen_clock(monkeypatch: pytest.MonkeyPatch) -> Iterator[list[float]]:
    """The recorder's clock, moved by hand; its notes cleared around the test."""
    now = [1000.0]
    recorder.reset()
    monkeypatch.setattr(recorder, "clock", lambda: now[0])
    try:
        yield now
    finally:
        recorder.reset()


READS = [
    "/api/v1/sites",
    "/api/v1/sites/{site}",
    "/api/v1/areas",
    "/api/v1/fixtures",
    "/api/v1/lamp-types",
    "/api/v1/burnout-reports",
    "/api/v1/lamp-removals",
    "/api/v1/burn-hours",
    "/api/v1/work-orders",
    "/api/v1/runs",
    "/api/v1/keys",
    "/api/v1/forecasts/sites/{site}",
    "/api/v1/sites/{site}/relamp-plan",
]


def test_gets_issue_no_writes(
    client: TestClient,
    admin: dict[str, str],
    make_key: Callable[[str], dict[str, str]],
    writes: Writes,
    frozen_clock: list[float],
    monkeypatch: pytest.MonkeyPatch,
) -> None:
    site = client.post("/api/v1/sites", json=SITE, headers=admin).json()["id"]
    assert any(s.lower().lstrip().startswith("insert") for s in writes.take())  # it counts
    # Leave out the once-a-minute key-use write (the next test covers it): what is left is
    # the request itself. Each GET uses a key never used before, the case that used to write.
    flushes: list[Any] = []
    monkeypatch.setattr(recorder, "flush", flushes.append)
    fresh = [make_key("admin") for _ in READS]
    writes.take()
    statuses = []
    for path, headers in zip(READS, fresh, strict=True):
        r = client.get(path.format(site=site), headers=headers)
        statuses.append(r.status_code)
        assert r.status_code < 500, (path, r.text)
        assert writes.take() == [], path
    assert statuses.count(200) >= 10
    assert len(flushes) == len(READS)  # key use was noted, to be written apart


def test_key_use_is_written_once_a_minute_after_the_answer(
    client: TestClient,
    reader: dict[str, str],
    db: Session,
    writes: Writes,
    frozen_clock: list[float],
) -> None:
    secret = reader["Authorization"].removeprefix("Bearer ")
    row = db.scalar(select(ApiKey).where(ApiKey.prefix == secret[:10]))
    assert row is not None and row.last_used_at is None
    assert client.get("/api/v1/sites", headers=reader).status_code == 200
    first = writes.take()
    # The first use is written, by the gate, in a transaction of its own: one UPDATE.
    assert len(first) == 1 and "api_keys" in first[0].lower()
    db.expire_all()
    assert db.get(ApiKey, row.id).last_used_at is not None  # type: ignore[union-attr]
    for _ in range(5):
        assert client.get("/api/v1/sites", headers=reader).status_code == 200
    assert writes.take() == []  # within the minute: nothing
    frozen_clock[0] += 61
    assert client.get("/api/v1/sites", headers=reader).status_code == 200
    assert len(writes.take()) == 1
