"""Weekly runs and a register write through the REAL session dependency (no override).

The app runs on a migrated database of the test's own whose commits are real, so each
request opens `get_session` as production does: a write request begins with BEGIN
IMMEDIATE on SQLite, and a run started over HTTP commits in its own job transactions while
the request's session only reads (`service.db.session.writes_in_jobs`).
"""

from __future__ import annotations

from collections.abc import Iterator
from concurrent.futures import ThreadPoolExecutor
from dataclasses import dataclass
from typing import Any

import pytest
from fastapi.testclient import TestClient
from sqlalchemy import Engine, event, func, select
from sqlalchemy.orm import Session

from service.config import get_settings
from service.db.session import get_engine, make_engine
from service.keys import service as keys_service
from service.main import create_app
from service.workorders.models import WorkOrder
from tests import factories as fx


@dataclass
class Served:
    """The app on its own database, a write key, the seeded site and a log of BEGINs."""

    client: TestClient
    headers: dict[str, str]
    site_id: int
    setup: Engine
    begins: list[str]


@pytest.fixture()
def served(own_db_url: str, monkeypatch: pytest.MonkeyPatch) -> Iterator[Served]:
    """The app with no session override on `own_db_url`, seeded with a due area."""
    monkeypatch.setenv("LAMPKEEPER_DATABASE_URL", own_db_url)
    get_settings.cache_clear()
    get_engine.cache_clear()
    setup = make_engine(own_db_url)
    with Session(setup, expire_on_commit=False) as s:
        _, secret = keys_service.create_key(s, "real-session-writer", "write")
        site = fx.plan_site(s)
        lt = fx.plan_lamp_type(s)
        # 20,000 h on a 1,000 h lamp: the group relamp is overdue.
        fx.plan_fixtures(s, fx.plan_area(s, site), lt, 3, hours_at_install=20_000.0)
        s.commit()
        site_id = site.id
    begins: list[str] = []

    def note(_conn: Any, _cursor: Any, statement: str, *_: Any) -> None:
        if statement.startswith("BEGIN"):
            begins.append(statement)

    event.listen(get_engine(), "before_cursor_execute", note)
    try:
        with TestClient(create_app(start_scheduler=False), raise_server_exceptions=False) as c:
            yield Served(c, {"Authorization": f"Bearer {secret}"}, site_id, setup, begins)
    finally:
        event.remove(get_engine(), "before_cursor_execute", note)
        get_engine().dispose()
        get_settings.cache_clear()
        get_engine.cache_clear()
        setup.dispose()


def _orders(engine: Engine) -> int:
    with Session(engine) as s:
        return int(s.scalar(select(func.count()).select_from(WorkOrder)) or 0)


def test_a_write_request_begins_as_the_writer(served: Served) -> None:
    served.begins.clear()
    r = served.client.post(
        "/api/v1/sites",
        json={**fx.SITE, "name": "Second Works"},
        headers=served.headers,
    )
    assert r.status_code == 201, r.text
    if served.setup.dialect.name == "sqlite":
        assert "BEGIN IMMEDIATE" in served.begins
    got = served.client.get(f"/api/v1/sites/{r.json()['id']}", headers=served.headers)
    assert got.status_code == 200 and got.json()["name"] == "Second Works"  # really committed


def test_run_over_http_commits_in_its_own_transactions(served: Served) -> None:
    url = f"/api/v1/sites/{served.site_id}/runs"
    r = served.client.post(url, json={"week": "2026-W49"}, headers=served.headers)
    assert r.status_code == 201, r.text
    body = r.json()
    assert body["outcome"] == "succeeded" and body["orders_created"] == 1, body
    assert _orders(served.setup) == 1  # seen from another connection: committed
    again = served.client.post(url, json={"week": "2026-W49"}, headers=served.headers)
    assert again.status_code == 201, again.text
    assert (again.json()["orders_created"], again.json()["orders_already_there"]) == (0, 1)
    assert _orders(served.setup) == 1
    missing = served.client.post("/api/v1/sites/999999/runs", headers=served.headers)
    assert missing.status_code == 404
    assert missing.headers["content-type"].startswith("application/problem+json")


def test_concurrent_runs_over_http_issue_one_set(served: Served) -> None:
    url = f"/api/v1/sites/{served.site_id}/runs"

    def post(_: int) -> Any:
        return served.client.post(url, json={"week": "2026-W50"}, headers=served.headers)

    with ThreadPoolExecutor(4) as pool:
        answers = list(pool.map(post, range(4)))
    assert [a.status_code for a in answers] == [201] * 4, [a.text for a in answers]
    bodies = [a.json() for a in answers]
    assert all(b["outcome"] == "succeeded" for b in bodies), bodies
    assert sorted(b["orders_created"] for b in bodies) == [0, 0, 0, 1]
    assert _orders(served.setup) == 1
