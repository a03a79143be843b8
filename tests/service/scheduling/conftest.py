"""A database of the test's own (migrated, committed to for real), for cross-process tests."""

from __future__ import annotations

from collections.abc import Iterator
from pathlib import Path

import pytest
from sqlalchemy.engine import make_url
from sqlalchemy.orm import Session, sessionmaker

from service.db.session import make_engine
from tests.conftest import migrate, scratch_postgres


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
    with scratch_postgres(db_url, "leases") as url:
        yield url
