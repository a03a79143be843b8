"""PostgreSQL connections killed mid-request (pg_terminate_backend from another connection):
the answer is 503 problem+json with Retry-After, never 500, nothing half-written is kept,
and the next request succeeds on a fresh connection."""

from __future__ import annotations

import time
from collections.abc import Iterator
from typing import Any

import pytest
from fastapi.testclient import TestClient
from sqlalchemy import Engine, event, func, select, text
from sqlalchemy.orm import Session

from service.config import get_settings
from service.db.session import get_engine, make_engine
from service.keys import service as keys_service
from service.main import create_app
from service.register.models import Site
from tests.conftest import local_postgres_url, scratch_postgres
from tests.factories import plan_site

REPEATS = 5
SITE: dict[str, Any] = {
    "name": "Dropped Line Depot",
    "time_zone": "Europe/Dublin",
    "nominal_voltage_v": 230,
    "currency": "EUR",
    "energy_price_per_kwh": 0.2,
    "labour_rate_per_h": 40,
}


@pytest.fixture()
def scratch_url() -> Iterator[str]:
    """A migrated database of this test's own on the local PostgreSQL server (every pass:
    pg_terminate_backend is PostgreSQL's), whose commits are real."""
    with scratch_postgres(local_postgres_url(), "dropped") as url:
        yield url


class Killer:
    """Kills the server connection that is about to run a matching statement."""

    def __init__(self, engine: Engine, killer: Engine) -> None:
        self.target: str | None = None
        self.kills = 0
        self.killer = killer
        event.listen(engine, "before_cursor_execute", self._before)

    def arm(self, fragment: str) -> None:
        """Kill the next connection whose statement contains `fragment`."""
        self.target = fragment

    def _before(self, conn: Any, _cursor: Any, statement: str, *_a: Any) -> None:
        if self.target is None or self.target not in statement:
            return
        self.target = None
        pid = conn.connection.dbapi_connection.info.backend_pid
        with self.killer.connect().execution_options(isolation_level="AUTOCOMMIT") as k:
            assert k.scalar(text("SELECT pg_terminate_backend(:p)"), {"p": pid})
            for _ in range(200):  # wait until the backend is really gone
                alive = k.scalar(
                    text("SELECT count(*) FROM pg_stat_activity WHERE pid = :p"), {"p": pid}
                )
                if not alive:
                    break
                time.sleep(0.01)
        self.kills += 1


@pytest.fixture()
def served(
    scratch_url: str, monkeypatch: pytest.MonkeyPatch
) -> Iterator[tuple[TestClient, Killer, dict[str, str], int, Engine]]:
    """The app on the scratch database (no session override), a Killer on its engine."""
    monkeypatch.setenv("LAMPKEEPER_DATABASE_URL", scratch_url)
    monkeypatch.setenv("LAMPKEEPER_KEY_CACHE_S", "0")  # every request asks for its key
    get_settings.cache_clear()
    get_engine.cache_clear()
    setup = make_engine(scratch_url)
    with Session(setup, expire_on_commit=False) as s:
        _, secret = keys_service.create_key(s, "dropped-writer", "write")
        site_id = plan_site(s).id
        s.commit()
    killer = Killer(get_engine(), setup)
    app = create_app(start_scheduler=False)
    try:
        with TestClient(app, raise_server_exceptions=False) as client:
            yield client, killer, {"Authorization": f"Bearer {secret}"}, site_id, setup
    finally:
        get_engine().dispose()
        get_settings.cache_clear()
        get_engine.cache_clear()
        setup.dispose()


def _is_busy(r: Any) -> None:
    assert r.status_code == 503, r.text
    assert r.headers["content-type"].startswith("application/problem+json")
    assert r.headers["retry-after"] == "1"
    assert r.json()["status"] == 503 and r.json()["type"] == "/problems/busy"


def _sites(engine: Engine) -> int:
    with Session(engine) as s:
        return int(s.scalar(select(func.count()).select_from(Site)) or 0)


@pytest.mark.parametrize(
    ("method", "fragment"),
    [
        ("GET", "FROM sites"),  # the route's own read
        ("GET", "FROM api_keys"),  # the gate's key check, before any route code
        ("POST", "INSERT INTO sites"),  # a write, mid-transaction
        ("POST", "INSERT INTO idempotency_keys"),  # the Idempotency-Key claim
    ],
)
def test_killed_connection_answers_503_then_recovers(
    served: tuple[TestClient, Killer, dict[str, str], int, Engine], method: str, fragment: str
) -> None:
    client, killer, h, site_id, setup = served
    for i in range(REPEATS):
        before = _sites(setup)
        killer.arm(fragment)
        if method == "GET":
            r = client.get(f"/api/v1/sites/{site_id}", headers=h)
        else:
            body = {**SITE, "name": f"Dropped {fragment[:12]} {i}"}
            r = client.post("/api/v1/sites", json=body, headers={**h, "Idempotency-Key": f"d{i}"})
        assert killer.kills == i + 1, "the statement to interrupt never ran"
        _is_busy(r)
        assert _sites(setup) == before  # nothing half-written survives
        # The next request gets a fresh connection and succeeds.
        if method == "GET":
            assert client.get(f"/api/v1/sites/{site_id}", headers=h).status_code == 200
        else:
            again = client.post(
                "/api/v1/sites",
                json={**SITE, "name": f"Dropped {fragment[:12]} {i}"},
                headers={**h, "Idempotency-Key": f"d{i}"},
            )
            assert again.status_code == 201, again.text  # the claim was dropped: it runs
            assert _sites(setup) == before + 1
