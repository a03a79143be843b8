"""Pooled connections: tested at checkout only after sitting idle, and replaced when dead."""

from __future__ import annotations

import time
from collections.abc import Iterator

import pytest
from sqlalchemy import Engine, create_engine, text
from sqlalchemy.exc import DBAPIError

from service.db import session as db_session
from service.db.session import make_engine
from tests.conftest import local_postgres_url, scratch_postgres


def _pid(conn: object) -> int:
    return int(conn.connection.dbapi_connection.info.backend_pid)  # type: ignore[attr-defined]


def _kill(killer: Engine, pid: int) -> None:
    """Terminate a backend from another connection and wait until it is gone."""
    with killer.connect() as k:
        assert k.scalar(text("SELECT pg_terminate_backend(:p)"), {"p": pid})
        for _ in range(200):
            gone = "SELECT count(*) FROM pg_stat_activity WHERE pid = :p"
            if not k.scalar(text(gone), {"p": pid}):
                return
            time.sleep(0.01)


@pytest.fixture()
def pg_url() -> Iterator[str]:
    """A scratch database on the local PostgreSQL server (pg_terminate_backend), every pass."""
    with scratch_postgres(local_postgres_url(), "idle_ping") as url:
        yield url


def test_a_connection_killed_while_idle_is_replaced_at_checkout(
    pg_url: str, monkeypatch: pytest.MonkeyPatch
) -> None:
    # The case pool_pre_ping covered: the server dropped a connection nobody was using
    # (restart, idle timeout). It must never reach a request.
    monkeypatch.setattr(db_session, "PING_AFTER_IDLE_S", 0.05)
    engine = make_engine(pg_url)
    killer = create_engine(pg_url, isolation_level="AUTOCOMMIT")
    try:
        with engine.connect() as conn:
            first = _pid(conn)
        _kill(killer, first)
        time.sleep(0.1)  # idle longer than PING_AFTER_IDLE_S
        with engine.connect() as conn:
            assert conn.scalar(text("SELECT 1")) == 1
            assert _pid(conn) != first
    finally:
        engine.dispose()
        killer.dispose()


def test_a_connection_back_within_the_idle_bound_is_not_tested(
    pg_url: str, monkeypatch: pytest.MonkeyPatch
) -> None:
    # Under load connections come back within milliseconds: no round trip to test them. So
    # one killed in that window is handed out, fails (a request answers 503), and the
    # disconnect empties the pool, so the next checkout gets a live connection.
    monkeypatch.setattr(db_session, "PING_AFTER_IDLE_S", 60.0)
    engine = make_engine(pg_url)
    killer = create_engine(pg_url, isolation_level="AUTOCOMMIT")
    try:
        with engine.connect() as conn:
            first = _pid(conn)
        _kill(killer, first)
        with pytest.raises(DBAPIError) as caught, engine.connect() as conn:
            conn.scalar(text("SELECT 1"))
        assert caught.value.connection_invalidated
        with engine.connect() as conn:
            assert conn.scalar(text("SELECT 1")) == 1
            assert _pid(conn) != first
    finally:
        engine.dispose()
        killer.dispose()
