"""Pooled connections: tested at checkout only after sitting idle, and replaced when dead."""

from __future__ import annotations

import time

import pytest
from sqlalchemy import Engine, create_engine, text
from sqlalchemy.engine import make_url
from sqlalchemy.exc import DBAPIError

from service.db import session as db_session
from service.db.session import make_engine


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


def test_a_connection_killed_while_idle_is_replaced_at_checkout(
    db_url: str, monkeypatch: pytest.MonkeyPatch
) -> None:
    # The case pool_pre_ping covered: the server dropped a connection nobody was using
    # (restart, idle timeout). It must never reach a request.
    if make_url(db_url).get_backend_name() != "postgresql":
        pytest.skip("pg_terminate_backend needs PostgreSQL")
    monkeypatch.setattr(db_session, "PING_AFTER_IDLE_S", 0.05)
    engine = make_engine(db_url)
    killer = create_engine(db_url, isolation_level="AUTOCOMMIT")
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
    db_url: str, monkeypatch: pytest.MonkeyPatch
) -> None:
    # Under load connections come back within milliseconds: no round trip to test them. So
    # one killed in that window is handed out, fails (a request answers 503), and the
    # disconnect empties the pool, so the next checkout gets a live connection.
    if make_url(db_url).get_backend_name() != "postgresql":
        pytest.skip("pg_terminate_backend needs PostgreSQL")
    monkeypatch.setattr(db_session, "PING_AFTER_IDLE_S", 60.0)
    engine = make_engine(db_url)
    killer = create_engine(db_url, isolation_level="AUTOCOMMIT")
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
