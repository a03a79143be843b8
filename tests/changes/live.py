"""A committed database of a module's own, and an API client on it (feed tests need real commits).

On PostgreSQL a change is read only once its transaction has finished, so the rolled-back
test transaction of the shared fixtures never shows its own changes.
"""

from __future__ import annotations

import os
from collections.abc import Iterator
from pathlib import Path

from fastapi import FastAPI, Request
from fastapi.testclient import TestClient
from sqlalchemy import Engine, text
from sqlalchemy.engine import make_url
from sqlalchemy.orm import Session, sessionmaker

from service.db.session import READ_ONLY_METHODS, begin_write, get_session, make_engine
from service.keys import service as keys_service
from tests.conftest import migrate


def scratch_url(db_url: str, tmp: Path, tag: str) -> str:
    """Create and migrate a fresh database next to the run's one; its URL."""
    base = make_url(db_url)
    if base.get_backend_name() != "postgresql":
        url = f"sqlite:///{tmp / f'{tag}.sqlite3'}"
    else:
        name = f"scratch_{tag}_{os.getpid()}"
        admin = make_engine(base.set(database="postgres").render_as_string(hide_password=False))
        with admin.connect().execution_options(isolation_level="AUTOCOMMIT") as conn:
            conn.execute(text(f'DROP DATABASE IF EXISTS "{name}" WITH (FORCE)'))
            conn.execute(text(f'CREATE DATABASE "{name}"'))
        admin.dispose()
        url = base.set(database=name).render_as_string(hide_password=False)
    engine = make_engine(url)
    migrate(engine)
    engine.dispose()
    return url


def drop_scratch(url: str) -> None:
    """Drop a scratch PostgreSQL database (a SQLite file goes with its tmp dir)."""
    parsed = make_url(url)
    if parsed.get_backend_name() != "postgresql":
        return
    admin = make_engine(parsed.set(database="postgres").render_as_string(hide_password=False))
    with admin.connect().execution_options(isolation_level="AUTOCOMMIT") as conn:
        conn.execute(text(f'DROP DATABASE IF EXISTS "{parsed.database}" WITH (FORCE)'))
    admin.dispose()


def admin_headers(factory: sessionmaker[Session], scope: str = "admin") -> dict[str, str]:
    """A committed key of a scope, as request headers."""
    with factory() as s:
        _, secret = keys_service.create_key(s, f"live-{scope}-{os.urandom(4).hex()}", scope)
        s.commit()
    return {"Authorization": f"Bearer {secret}"}


def live_client(app: FastAPI, engine: Engine) -> Iterator[TestClient]:
    """A client whose every request commits for real on `engine`."""
    factory = sessionmaker(bind=engine, expire_on_commit=False, autoflush=False)

    def session_override(request: Request = None) -> Iterator[Session]:  # type: ignore[assignment]
        session = factory()
        try:
            if request is not None and request.method not in READ_ONLY_METHODS:
                begin_write(session)
            yield session
            session.commit()
        except BaseException:
            session.rollback()
            raise
        finally:
            session.close()

    app.dependency_overrides[get_session] = session_override
    try:
        with TestClient(app, raise_server_exceptions=False) as c:
            yield c
    finally:
        app.dependency_overrides.clear()
