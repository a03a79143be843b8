"""Run sessions on the test connection; `own_db_url` (tests/conftest.py) for cross-process tests."""

from __future__ import annotations

import pytest
from sqlalchemy.orm import Session, sessionmaker


@pytest.fixture()
def factory(db: Session) -> sessionmaker[Session]:
    """Sessions on the test connection: a run's commit releases a savepoint, nothing more."""
    return sessionmaker(
        bind=db.get_bind(), expire_on_commit=False, join_transaction_mode="create_savepoint"
    )
