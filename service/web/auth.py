"""Cookie sessions for pages: who is signed in, CSRF checks, role checks on every POST."""

from __future__ import annotations

import hmac
from dataclasses import dataclass
from typing import Annotated

from fastapi import Depends, Request
from sqlalchemy.orm import Session

from service.api.auth import SessionDep
from service.users import service as users
from service.users.models import User, UserSession

COOKIE = "lk_session"


class NeedsSignIn(Exception):
    """No live session: pages answer a redirect to the sign-in page."""


class PageForbidden(Exception):
    """The role may not do this, or the form's CSRF token is wrong (403)."""

    def __init__(self, message: str) -> None:
        super().__init__(message)
        self.message = message


@dataclass(frozen=True)
class Visitor:
    """The signed-in person and their session (for the CSRF token)."""

    user: User
    row: UserSession

    @property
    def csrf(self) -> str:
        """The per-session token every form carries."""
        return self.row.csrf_token

    def can(self, action: str) -> bool:
        """Whether the role may take a page action."""
        return users.can(self.user.role, action)


def current(request: Request, session: SessionDep) -> Visitor:
    """The signed-in visitor or NeedsSignIn."""
    token = request.cookies.get(COOKIE)
    found = users.find_session(session, token) if token else None
    if found is None:
        raise NeedsSignIn()
    return Visitor(user=found[1], row=found[0])


VisitorDep = Annotated[Visitor, Depends(current)]


def check_post(visitor: Visitor, csrf_token: str, action: str | None = None) -> None:
    """Refuse a POST whose CSRF token differs or whose role lacks the action."""
    if not hmac.compare_digest(visitor.csrf.encode(), csrf_token.encode()):
        raise PageForbidden("The form is stale or forged (CSRF token mismatch). Reload the page.")
    if action is not None and not visitor.can(action):
        raise PageForbidden(f"Your role ({visitor.user.role}) may not do this.")


def client_ip(request: Request) -> str:
    """The peer address (no proxy headers are trusted)."""
    return request.client.host if request.client else "unknown"


def set_cookie_secure(request: Request) -> bool:
    """Secure cookies when served over HTTPS."""
    return request.url.scheme == "https"


__all__ = ["Session", "VisitorDep", "check_post", "current"]
