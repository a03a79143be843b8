"""Shared fixtures: a migrated database per run, a rolled-back transaction per test.

The suite runs against the database in TEST_DATABASE_URL (a fresh SQLite file by
default). For PostgreSQL, e.g. postgresql+psycopg://postgres@127.0.0.1:5432/test:
the schema is emptied and rebuilt by the migrations at the start of the run.
"""

from __future__ import annotations

import os
from collections.abc import Callable, Iterator
from contextlib import contextmanager
from pathlib import Path

import pytest
from alembic import command
from fastapi import FastAPI
from fastapi.testclient import TestClient
from sqlalchemy import Engine, text
from sqlalchemy.engine import make_url
from sqlalchemy.orm import Session, sessionmaker

from service.api.health import alembic_config
from service.db.session import get_job_factory, get_session, make_engine
from service.forecasting.fit_cache import cache as fit_cache
from service.keys import service as keys_service
from service.keys.cache import cache as key_cache
from service.main import create_app


def database_url(tmp_dir: Path) -> str:
    """The test database URL: TEST_DATABASE_URL, else a new SQLite file."""
    return os.environ.get("TEST_DATABASE_URL") or f"sqlite:///{tmp_dir / 'test.sqlite3'}"


def reset_database(engine: Engine) -> None:
    """Empty the database so the migrations start from nothing."""
    if engine.dialect.name == "postgresql":
        with engine.begin() as conn:
            conn.execute(text("DROP SCHEMA public CASCADE"))
            conn.execute(text("CREATE SCHEMA public"))


def migrate(engine: Engine, revision: str = "head") -> None:
    """Run the Alembic migrations up to a revision on this engine."""
    cfg = alembic_config()
    cfg.attributes["configure_logger"] = False
    with engine.begin() as conn:
        cfg.attributes["connection"] = conn
        command.upgrade(cfg, revision)


@contextmanager
def scratch_postgres(base_url: str, label: str) -> Iterator[str]:
    """A migrated PostgreSQL database of a test's own (real commits), dropped afterwards."""
    base = make_url(base_url)
    name = f"scratch_{label}_{os.getpid()}"
    admin = make_engine(base.set(database="postgres").render_as_string(hide_password=False))
    with admin.connect().execution_options(isolation_level="AUTOCOMMIT") as conn:
        conn.execute(text(f'DROP DATABASE IF EXISTS "{name}"'))
        conn.execute(text(f'CREATE DATABASE "{name}"'))
    url = base.set(database=name).render_as_string(hide_password=False)
    engine = make_engine(url)
    migrate(engine)
    engine.dispose()
    try:
        yield url
    finally:
        with admin.connect().execution_options(isolation_level="AUTOCOMMIT") as conn:
            conn.execute(text(f'DROP DATABASE IF EXISTS "{name}" WITH (FORCE)'))
        admin.dispose()


LOCAL_POSTGRES = "postgresql+psycopg://postgres@127.0.0.1:5432/test"


def local_postgres_url() -> str:
    """The local PostgreSQL server the suite needs (what `.ci/run` starts), whatever pass runs.

    A few tests are about PostgreSQL itself (killed backends, replica processes, the
    benchmarks' scratch databases): they run against this server on every pass and fail,
    naming it, when it does not answer, instead of being skipped.
    """
    url = os.environ.get("TEST_DATABASE_URL") or os.environ.get("TEST_POSTGRES_URL") or ""
    url = url if url.startswith("postgresql") else LOCAL_POSTGRES
    engine = make_engine(make_url(url).set(database="postgres").render_as_string(False))
    try:
        with engine.connect():
            pass
    except Exception as exc:
        pytest.fail(f"these tests need PostgreSQL at {url} (bash .ci/run starts it): {exc}")
    finally:
        engine.dispose()
    return url


TESTS = Path(__file__).resolve().parent
# Test tiers, one marker each (`pytest -m unit`): by folder for tests/unit, tests/service,
# tests/http and tests/browser; in a domain folder by the fixtures a test takes.
TIERS = {
    "unit": "no database: pure computation on values and arrays",
    "service": "a database session, no HTTP",
    "http": "through the ASGI app (TestClient)",
    "browser": "a real browser against a served app",
}
HTTP_FIXTURES = frozenset({"client", "app"})
DB_FIXTURES = frozenset({"db_url", "engine", "db", "own_db_url", "scratch_url"})


def pytest_configure(config: pytest.Config) -> None:
    """Register one marker per test tier."""
    for name, meaning in TIERS.items():
        config.addinivalue_line("markers", f"{name}: tier - {meaning}")


def tier_of(path: Path, fixtures: set[str]) -> str:
    """A test's tier: its tier folder, else http with a client, service with a database."""
    try:
        top = path.resolve().relative_to(TESTS).parts[0]
    except (ValueError, IndexError):
        top = ""
    if top in TIERS:
        return top
    if fixtures & HTTP_FIXTURES:
        return "http"
    if fixtures & DB_FIXTURES:
        return "service"
    return "unit"


def pytest_collection_modifyitems(config: pytest.Config, items: list[pytest.Item]) -> None:
    """Mark each test with its tier; skip tests marked postgres_only on SQLite."""
    for item in items:
        fixtures = set(getattr(item, "fixturenames", ()))
        if "postgres_only" in item.keywords:
            fixtures.add("db_url")  # a database by definition, whatever fixture it takes
        tier = tier_of(Path(item.path), fixtures)
        if tier == "unit" and fixtures & DB_FIXTURES:
            raise pytest.UsageError(f"{item.nodeid} is in tests/unit but takes a database")
        item.add_marker(getattr(pytest.mark, tier))
    if (os.environ.get("TEST_DATABASE_URL") or "").startswith("postgresql"):
        return
    skip = pytest.mark.skip(reason="needs PostgreSQL: set TEST_DATABASE_URL")
    for item in items:
        if "postgres_only" in item.keywords:
            item.add_marker(skip)


@pytest.fixture(autouse=True)
def _fresh_caches() -> Iterator[None]:
    """Each test starts without cached keys or field fits (ids repeat across rollbacks)."""
    key_cache.clear()
    fit_cache.clear()
    yield
    key_cache.clear()
    fit_cache.clear()


@pytest.fixture(scope="session")
def db_url(tmp_path_factory: pytest.TempPathFactory) -> str:
    """The URL of this run's database."""
    return database_url(tmp_path_factory.mktemp("db"))


@pytest.fixture(scope="session")
def engine(db_url: str) -> Iterator[Engine]:
    """An engine on a database built from empty by the migrations."""
    eng = make_engine(db_url)
    reset_database(eng)
    migrate(eng)
    yield eng
    eng.dispose()


@pytest.fixture()
def db(engine: Engine) -> Iterator[Session]:
    """A session inside a transaction that is rolled back after the test."""
    conn = engine.connect()
    outer = conn.begin()
    session = Session(bind=conn, join_transaction_mode="create_savepoint", expire_on_commit=False)
    try:
        yield session
    finally:
        session.close()
        if outer.is_active:
            outer.rollback()
        conn.close()


@pytest.fixture()
def own_db_url(db_url: str, tmp_path: Path) -> Iterator[str]:
    """A fresh migrated database of the test's own (real commits): SQLite file or PostgreSQL."""
    if make_url(db_url).get_backend_name() != "postgresql":
        url = f"sqlite:///{tmp_path / 'own.sqlite3'}"
        eng = make_engine(url)
        migrate(eng)
        eng.dispose()
        yield url
        return
    with scratch_postgres(db_url, "own") as url:
        yield url


@pytest.fixture(scope="session")
def app() -> FastAPI:
    """One application for the run (building it is not free); tests override its session."""
    return create_app(start_scheduler=False)


@pytest.fixture()
def client(app: FastAPI, db: Session) -> Iterator[TestClient]:
    """An API client whose requests share the test's rolled-back transaction."""

    def session_override() -> Iterator[Session]:
        # Same contract as the real dependency: commit (a savepoint here) or roll back.
        try:
            yield db
            db.commit()
        except BaseException:
            db.rollback()
            raise
        finally:
            # A real request ends with its session closed, so the next one reads fresh rows.
            # The shared session keeps its identity map: expire it, or an object loaded before
            # a bulk UPDATE (a retirement) reads stale until something happens to roll back.
            db.expire_all()

    app.dependency_overrides[get_session] = session_override
    # Jobs that commit on their own (the weekly run) do so in savepoints of the same connection.
    app.dependency_overrides[get_job_factory] = lambda: sessionmaker(
        bind=db.get_bind(), expire_on_commit=False, join_transaction_mode="create_savepoint"
    )
    try:
        with TestClient(app, raise_server_exceptions=False) as c:
            yield c
    finally:
        app.dependency_overrides.clear()


@pytest.fixture()
def make_key(db: Session) -> Callable[[str], dict[str, str]]:
    """Factory: headers carrying a fresh API key with a scope."""
    counter = iter(range(1_000_000))

    def make(scope: str = "admin") -> dict[str, str]:
        _, secret = keys_service.create_key(db, f"test-{scope}-{next(counter)}", scope)
        # Commit the savepoint: a later request's rollback must not take the key with it.
        db.commit()
        return {"Authorization": f"Bearer {secret}"}

    return make


@pytest.fixture()
def admin(make_key: Callable[[str], dict[str, str]]) -> dict[str, str]:
    """Headers with an admin key."""
    return make_key("admin")


@pytest.fixture()
def writer(make_key: Callable[[str], dict[str, str]]) -> dict[str, str]:
    """Headers with a write key."""
    return make_key("write")


@pytest.fixture()
def reader(make_key: Callable[[str], dict[str, str]]) -> dict[str, str]:
    """Headers with a read-only key."""
    return make_key("read")
