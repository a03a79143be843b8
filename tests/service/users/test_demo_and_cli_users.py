"""Demo users, one per role, and the users CLI rules (service tier)."""

from __future__ import annotations

from sqlalchemy.orm import Session

from service.seed.users import DEMO_PASSWORD, ensure_demo_users
from service.users import service as users
from service.users.models import Role


def test_demo_users_one_per_role_and_idempotent(db: Session) -> None:
    first = ensure_demo_users(db)
    assert sorted(r for _, r in first) == sorted(Role)
    ensure_demo_users(db)  # a second run adds nothing and does not fail
    assert len([u for u in users.list_users(db) if u.username in dict(first)]) == 4
    signed = users.sign_in(db, "tamo", DEMO_PASSWORD, "127.0.0.1")
    assert users.find_session(db, signed.token) is not None


def test_disable_ends_sessions(db: Session) -> None:
    users.create_user(db, "dora", "Dora", "planner", "a long passphrase")
    signed = users.sign_in(db, "dora", "a long passphrase", "10.0.0.1")
    users.disable_user(db, "dora")
    assert users.find_session(db, signed.token) is None
