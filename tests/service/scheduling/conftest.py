"""A database of the test's own (migrated, committed to for real), for cross-process tests."""

from __future__ import annotations

import os
from collections.abc import Iterator
from pathlib import Path

import pytest
from sqlalchemy import text
from sqlalchemy.engine import make_url
from sqlalchemy.orm import Session, sessionmaker

from service.db.session import make_engine
from tests.conftest import migrate


@pytest.fixture()
def factory(db: Session) -> sessionmaker[Session]:
    """Sessions on the test connection: a run's commit releases a savepoint, nothing more."""
    return sessionmaker(
        bind=db.get_bind(), expire_on_commit=False, join_transaction_mode="create_savepoint"
    )


@pytest.fixture()
def own_db_url(db_url: str, tmp_path: Path) -> Iterator[str]:
    """A fresh migrated database: a SQLite file, or a scratch PostgreSQL database."""
    base = make_url(db_url)
    if base.get_backend_name() != "postgresql":
        url = f"sqlite:///{tmp_path / 'leases.sqlite3'}"
        engine = make_engine(url)
        migrate(engine)
        engine.dispose()
        yield url
        return
    name = f"scratch_leases_{os.getpid()}"
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
