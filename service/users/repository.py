"""Queries for users, sessions and failed sign-ins."""

from __future__ import annotations

from collections.abc import Sequence
from datetime import datetime

from sqlalchemy import func, select
from sqlalchemy.orm import Session

from service.users.models import SignInFailure, User, UserSession


def by_username(session: Session, username: str) -> User | None:
    """The user with this username, or None."""
    return session.scalars(select(User).where(User.username == username)).first()


def all_users(session: Session) -> Sequence[User]:
    """Every user, by username."""
    return session.scalars(select(User).order_by(User.username)).all()


def session_by_hash(session: Session, token_hash: str) -> UserSession | None:
    """The sign-in session with this token digest, or None."""
    stmt = select(UserSession).where(UserSession.token_hash == token_hash)
    return session.scalars(stmt).first()


def failures_since(
    session: Session, since: datetime, *, username: str | None = None, ip: str | None = None
) -> tuple[int, datetime | None]:
    """How many failures since a time for an account or an address, and the latest."""
    stmt = select(func.count(SignInFailure.id), func.max(SignInFailure.failed_at)).where(
        SignInFailure.failed_at >= since
    )
    if username is not None:
        stmt = stmt.where(SignInFailure.username == username)
    if ip is not None:
        stmt = stmt.where(SignInFailure.ip == ip)
    count, latest = session.execute(stmt).one()
    if isinstance(latest, datetime) and latest.tzinfo is None:
        from datetime import UTC

        latest = latest.replace(tzinfo=UTC)
    return int(count), latest
