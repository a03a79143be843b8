"""Engine, session factory and the one-transaction-per-request dependency."""

from __future__ import annotations

import time
from collections.abc import AsyncIterator, Iterator
from contextlib import AbstractContextManager, contextmanager
from functools import lru_cache
from pathlib import Path
from typing import Annotated, Any, TypeVar

import anyio
import anyio.to_thread
from fastapi import Depends, Request
from sqlalchemy import Connection, Engine, create_engine, event
from sqlalchemy.engine import make_url
from sqlalchemy.exc import DisconnectionError
from sqlalchemy.orm import Session, sessionmaker
from sqlalchemy.pool import QueuePool

from service.config import get_settings


def _sqlite_pragmas(dbapi_connection: Any, _record: Any) -> None:
    # Let SQLAlchemy, not the sqlite3 module, decide when transactions begin, so that
    # savepoints and transactional DDL behave as on PostgreSQL.
    dbapi_connection.isolation_level = None
    cur = dbapi_connection.cursor()
    # SQLite ignores foreign keys unless asked, per connection.
    cur.execute("PRAGMA foreign_keys=ON")
    cur.execute("PRAGMA journal_mode=WAL")
    cur.execute("PRAGMA synchronous=NORMAL")
    cur.close()


# Execution option marking a transaction that will write (see _sqlite_begin, begin_write).
WRITE_OPTION = "lampkeeper_write"
READ_ONLY_METHODS = frozenset({"GET", "HEAD", "OPTIONS"})
# Endpoint attribute set by writes_in_jobs: the request's own session only reads.
JOB_WRITES = "lampkeeper_writes_in_jobs"

F = TypeVar("F")


def _sqlite_begin(conn: Connection) -> None:
    # A writer takes SQLite's write lock at once (BEGIN IMMEDIATE), so a second writer waits
    # out the busy timeout instead of failing when a deferred read lock cannot be upgraded.
    immediate = conn.get_execution_options().get(WRITE_OPTION, False)
    conn.exec_driver_sql("BEGIN IMMEDIATE" if immediate else "BEGIN")


def begin_write(session: Session) -> None:
    """Open the session's transaction as a writer (SQLite: BEGIN IMMEDIATE; else no change)."""
    session.connection(execution_options={WRITE_OPTION: True})


def make_engine(url: str) -> Engine:
    """Create an engine for a database URL, with SQLite made safe for a web server."""
    settings = get_settings()
    parsed = make_url(url)
    pool: dict[str, Any] = {
        "pool_size": settings.db_pool_size,
        "max_overflow": settings.db_max_overflow,
        "pool_timeout": settings.db_pool_timeout_s,
    }
    if parsed.get_backend_name() == "sqlite":
        if parsed.database and parsed.database != ":memory:":
            Path(parsed.database).parent.mkdir(parents=True, exist_ok=True)
            # A file database gets a real pool sized for the server's threads, so 50 clients
            # queue for a connection instead of failing (in-memory keeps the default pool).
            extra: dict[str, Any] = {"poolclass": QueuePool, **pool}
        else:
            extra = {}
        connect_args = {"check_same_thread": False, "timeout": settings.sqlite_busy_timeout_s}
        engine = create_engine(url, connect_args=connect_args, **extra)
        event.listen(engine, "connect", _sqlite_pragmas)
        event.listen(engine, "begin", _sqlite_begin)
        return engine
    engine = create_engine(url, **pool)
    event.listen(engine.pool, "checkin", _note_idle)
    event.listen(engine.pool, "checkout", _ping_if_idle)
    return engine


# Seconds a pooled connection may sit unused before it is tested at checkout. A test on
# every checkout (pool_pre_ping) costs a round trip per request; under load connections
# come back within milliseconds, and one the server dropped while in use invalidates the
# whole pool (SQLAlchemy's disconnect handling), so only long-idle ones need the test.
PING_AFTER_IDLE_S = 2.0


def _note_idle(_dbapi_connection: Any, record: Any) -> None:
    record.info["idle_since"] = time.monotonic()


def _ping_if_idle(dbapi_connection: Any, record: Any, _proxy: Any) -> None:
    # A server restart or an idle timeout kills connections nobody is using: test those,
    # and hand out a fresh one instead (DisconnectionError makes the pool reconnect).
    since = record.info.get("idle_since")
    if since is None or time.monotonic() - since < PING_AFTER_IDLE_S:
        return
    try:
        cur = dbapi_connection.cursor()
        try:
            cur.execute("SELECT 1")
        finally:
            cur.close()
        dbapi_connection.rollback()  # the driver opened a transaction for the SELECT
    except Exception as exc:
        raise DisconnectionError(f"pooled connection lost while idle: {exc}") from exc


@lru_cache
def get_engine() -> Engine:
    """The process-wide engine built from the settings."""
    return make_engine(get_settings().database_url)


def session_factory(engine: Engine | None = None) -> sessionmaker[Session]:
    """A session factory bound to an engine (the settings' engine by default)."""
    if engine is None:
        return _default_factory(get_engine())
    return sessionmaker(bind=engine, expire_on_commit=False, autoflush=False)


@lru_cache(maxsize=4)
def _default_factory(engine: Engine) -> sessionmaker[Session]:
    # One factory per process engine, not one per request.
    return sessionmaker(bind=engine, expire_on_commit=False, autoflush=False)


def get_job_factory() -> sessionmaker[Session]:
    """FastAPI dependency: the factory a route hands to a job that commits on its own.

    The weekly run opens and commits its own short transactions; tests override this to
    bind the factory to their rolled-back connection.
    """
    return session_factory()


JobFactoryDep = Annotated[sessionmaker[Session], Depends(get_job_factory)]


def writes_in_jobs(endpoint: F) -> F:
    """Mark a route whose writes all happen in a job's own transactions (the weekly run).

    Its request session then begins as a reader even for a POST: on SQLite a writer's
    BEGIN IMMEDIATE would hold the one write lock the job, on another connection, waits for.
    """
    setattr(endpoint, JOB_WRITES, True)
    return endpoint


def request_writes(request: Request) -> bool:
    """Whether a request's own transaction may write (not a GET, not a writes_in_jobs route)."""
    if request.method in READ_ONLY_METHODS:
        return False
    return not getattr(request.scope.get("endpoint"), JOB_WRITES, False)


async def get_session(request: Request) -> AsyncIterator[Session]:
    """FastAPI dependency: one transaction per request, committed on success, else rolled back.

    Async so that a read costs no worker-thread hop to begin (making a Session does no I/O);
    what does I/O (a writer's BEGIN, which may wait for SQLite's write lock, the commit or
    rollback and the connection's return) runs in a worker thread, shielded so a cancelled
    request still ends its transaction.
    """
    session = session_factory()()
    try:
        if request_writes(request):
            await anyio.to_thread.run_sync(begin_write, session)
        yield session
        with anyio.CancelScope(shield=True):
            await anyio.to_thread.run_sync(_commit_and_close, session)
    except BaseException:
        with anyio.CancelScope(shield=True):
            await anyio.to_thread.run_sync(_rollback_and_close, session)
        raise


def _commit_and_close(session: Session) -> None:
    try:
        session.commit()
    except BaseException:
        session.rollback()
        raise
    finally:
        session.close()


def _rollback_and_close(session: Session) -> None:
    try:
        session.rollback()
    finally:
        session.close()


@contextmanager
def short_session(app: Any, *, write: bool) -> Iterator[Session]:
    """A short transaction of its own for middleware, outside any request's transaction.

    Uses the app's ``dependency_overrides[get_session]`` when set (tests share their
    rolled-back transaction that way), else a fresh session; `write` opens it as a writer.
    """
    override = getattr(app, "dependency_overrides", {}).get(get_session)
    if override is not None:
        gen = override()
        session = next(gen)
        try:
            yield session
        except BaseException as exc:
            gen.throw(exc)
            raise
        else:
            next(gen, None)
        return
    session = session_factory()()
    try:
        if write:
            begin_write(session)
        yield session
    except BaseException:
        _rollback_and_close(session)
        raise
    _commit_and_close(session)  # as a request's session ends: rolled back if the commit fails


def transaction() -> AbstractContextManager[Session]:
    """One transaction for a command-line command: committed on success, rolled back on error."""
    return short_session(None, write=True)
