"""Rules for accounts, sign-in, sessions, CSRF tokens and the failed sign-in lock-out."""

from __future__ import annotations

import hashlib
import secrets
from collections.abc import Sequence
from dataclasses import dataclass
from datetime import datetime, timedelta

from sqlalchemy import delete
from sqlalchemy.orm import Session

from service.api.errors import Conflict, Invalid, NotFound
from service.db.base import utcnow
from service.keys.service import scope_allows
from service.users import repository as repo
from service.users.models import ROLE_SCOPE, Role, SignInFailure, User, UserSession
from service.users.passwords import (
    DUMMY_HASH,
    MIN_LENGTH,
    hash_password,
    verify_password,
)

SESSION_LIFETIME = timedelta(hours=12)
FAILURE_WINDOW = timedelta(minutes=15)
ACCOUNT_LIMIT = 5  # failures per account in the window before it is locked
IP_LIMIT = 20  # failures per address in the window before the address is locked


class SignInRefused(Exception):
    """Sign-in failed; `locked` tells a lock-out from a wrong password."""

    def __init__(self, message: str, *, locked: bool) -> None:
        super().__init__(message)
        self.locked = locked


@dataclass(frozen=True)
class SignedIn:
    """A fresh session: the cookie token (shown once) and its row."""

    token: str
    row: UserSession


def token_digest(token: str) -> str:
    """SHA-256 hex of a session token (tokens are random, so no salt is needed)."""
    return hashlib.sha256(token.encode()).hexdigest()


def _check_password(password: str) -> None:
    if len(password) < MIN_LENGTH or len(password) > 1000:
        raise Invalid(
            f"The password needs {MIN_LENGTH} to 1000 characters.",
            errors=[{"field": "password", "in": "body", "message": "length"}],
        )


def create_user(
    session: Session, username: str, display_name: str, role: str, password: str
) -> User:
    """Add an account; the username must be new."""
    if role not in Role.__members__:
        raise Invalid(f"Unknown role {role!r}; one of {', '.join(Role)}.")
    name = username.strip().lower()
    if not name or len(name) > 60:
        raise Invalid("The username needs 1 to 60 characters.")
    _check_password(password)
    if repo.by_username(session, name) is not None:
        raise Conflict(f"The username {name!r} is taken.")
    user = User(
        username=name,
        display_name=display_name.strip() or name,
        role=role,
        password_hash=hash_password(password),
    )
    session.add(user)
    session.flush()
    return user


def get_user(session: Session, username: str) -> User:
    """The account or NotFound."""
    user = repo.by_username(session, username.strip().lower())
    if user is None:
        raise NotFound(f"No user {username!r}.")
    return user


def list_users(session: Session) -> Sequence[User]:
    """Every account."""
    return repo.all_users(session)


def disable_user(session: Session, username: str) -> User:
    """Disable an account and end its sessions."""
    user = get_user(session, username)
    user.disabled_at = user.disabled_at or utcnow()
    session.execute(delete(UserSession).where(UserSession.user_id == user.id))
    session.flush()
    return user


def set_password(session: Session, username: str, password: str) -> User:
    """Replace a password and end the account's sessions."""
    user = get_user(session, username)
    _check_password(password)
    user.password_hash = hash_password(password)
    session.execute(delete(UserSession).where(UserSession.user_id == user.id))
    session.flush()
    return user


def _locked(session: Session, username: str, ip: str, now: datetime) -> bool:
    since = now - FAILURE_WINDOW
    by_account, _ = repo.failures_since(session, since, username=username)
    by_ip, _ = repo.failures_since(session, since, ip=ip)
    return by_account >= ACCOUNT_LIMIT or by_ip >= IP_LIMIT


def sign_in(session: Session, username: str, password: str, ip: str) -> SignedIn:
    """Check the password (unless locked out) and open a session; record failures."""
    name = username.strip().lower()[:60]
    now = utcnow()
    if _locked(session, name, ip, now):
        raise SignInRefused(
            "Too many failed sign-ins. Wait 15 minutes or ask an administrator.", locked=True
        )
    user = repo.by_username(session, name)
    ok = verify_password(user.password_hash if user else DUMMY_HASH, password)
    if user is None or not ok or user.disabled_at is not None:
        session.add(SignInFailure(username=name, ip=ip[:64], failed_at=now))
        session.flush()
        raise SignInRefused("The username or password is wrong.", locked=False)
    token = secrets.token_urlsafe(32)
    row = UserSession(
        token_hash=token_digest(token),
        user_id=user.id,
        csrf_token=secrets.token_urlsafe(32),
        expires_at=now + SESSION_LIFETIME,
    )
    session.add(row)
    session.flush()
    return SignedIn(token=token, row=row)


def find_session(session: Session, token: str) -> tuple[UserSession, User] | None:
    """The live session and its active user for a cookie token, or None."""
    row = repo.session_by_hash(session, token_digest(token))
    if row is None or row.expires_at <= utcnow():
        return None
    user = session.get(User, row.user_id)
    if user is None or user.disabled_at is not None:
        return None
    return row, user


def sign_out(session: Session, token: str) -> None:
    """End the session for a cookie token."""
    session.execute(delete(UserSession).where(UserSession.token_hash == token_digest(token)))


def role_allows(role: str, scope: str) -> bool:
    """True when a role's API scope covers the needed one."""
    return scope_allows(ROLE_SCOPE[Role(role)], scope)


def can(role: str, action: str) -> bool:
    """Whether a role may take a named page action (the server checks on every POST)."""
    allowed: dict[str, set[Role]] = {
        "report_burnout": {Role.technician, Role.planner, Role.administrator},
        "work_order": {Role.technician, Role.planner, Role.administrator},
        "complete_order": {Role.technician, Role.planner, Role.administrator},
        "issue_order": {Role.planner, Role.administrator},
        "cancel_order": {Role.planner, Role.administrator},
        "edit_register": {Role.planner, Role.administrator},
        "start_run": {Role.planner, Role.administrator},
    }
    return Role(role) in allowed.get(action, set())
