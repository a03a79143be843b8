"""User, sign-in session and failed sign-in tables."""

from __future__ import annotations

import enum
from datetime import datetime

from sqlalchemy import ForeignKey, String
from sqlalchemy.orm import Mapped, mapped_column

from service.db.base import Base, TimestampMixin


class Role(enum.StrEnum):
    """What a person may do; each maps onto an API scope (see ROLE_SCOPE)."""

    viewer = "viewer"  # looks only
    technician = "technician"  # reports burnouts, completes orders
    planner = "planner"  # edits the register, plans, issues orders
    administrator = "administrator"  # everything, including people and keys


# The API scope a role's actions need at most (read < write < admin).
ROLE_SCOPE: dict[Role, str] = {
    Role.viewer: "read",
    Role.technician: "write",
    Role.planner: "write",
    Role.administrator: "admin",
}
ROLE_RANK: dict[Role, int] = {r: i for i, r in enumerate(Role)}


class User(TimestampMixin, Base):
    """A person who signs in; only an argon2 hash of the password is stored."""

    __tablename__ = "users"

    id: Mapped[int] = mapped_column(primary_key=True)
    username: Mapped[str] = mapped_column(String(60), unique=True)
    display_name: Mapped[str] = mapped_column(String(120))
    role: Mapped[str] = mapped_column(String(20))
    password_hash: Mapped[str] = mapped_column(String(200))
    disabled_at: Mapped[datetime | None] = mapped_column(default=None)


class UserSession(TimestampMixin, Base):
    """A signed-in browser; the cookie holds the token, the table its SHA-256."""

    __tablename__ = "user_sessions"

    id: Mapped[int] = mapped_column(primary_key=True)
    token_hash: Mapped[str] = mapped_column(String(64), unique=True)
    user_id: Mapped[int] = mapped_column(ForeignKey("users.id", ondelete="CASCADE"), index=True)
    csrf_token: Mapped[str] = mapped_column(String(64))
    expires_at: Mapped[datetime] = mapped_column()


class SignInFailure(Base):
    """One refused sign-in, counted per account and per address for the lock-out."""

    __tablename__ = "sign_in_failures"

    id: Mapped[int] = mapped_column(primary_key=True)
    username: Mapped[str] = mapped_column(String(60), index=True)
    ip: Mapped[str] = mapped_column(String(64), index=True)
    failed_at: Mapped[datetime] = mapped_column()
