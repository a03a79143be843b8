"""Domain errors that carry their HTTP status: raised by every layer, rendered by service.api.

The bottom of the layers (above only config and the numeric core), so the database helpers
and the key check can raise them without importing the web layer. `service.api.errors`
re-exports them beside the handlers that render them as problem+json.
"""

from __future__ import annotations

from typing import Any


class DomainError(Exception):
    """Base of every error a service raises on purpose; subclasses set status and title."""

    status: int = 400
    title: str = "Bad request"
    kind: str = "bad-request"

    def __init_subclass__(
        cls, *, status: int | None = None, title: str | None = None, kind: str | None = None
    ) -> None:
        # class NotFound(DomainError, status=404, title="Not found", kind="not-found")
        super().__init_subclass__()
        if status is not None:
            cls.status = status
        if title is not None:
            cls.title = title
        if kind is not None:
            cls.kind = kind

    def __init__(self, detail: str, *, errors: list[dict[str, Any]] | None = None, **extra: Any):
        super().__init__(detail)
        self.detail = detail
        self.errors = errors
        self.extra = extra


class NotFound(DomainError, status=404, title="Not found", kind="not-found"):
    """A referenced resource does not exist (404)."""


class Conflict(DomainError, status=409, title="Conflict", kind="conflict"):
    """The request clashes with stored state: duplicates, resources in use, lifecycle (409)."""


class Invalid(DomainError, status=422, title="Invalid value", kind="invalid-value"):
    """Values that parse but break a rule of the domain (422)."""


class Unauthorized(DomainError, status=401, title="Not authenticated", kind="not-authenticated"):
    """No API key, or one we do not know (401)."""


class Forbidden(DomainError, status=403, title="Not allowed", kind="not-allowed"):
    """The API key lacks the scope a route needs (403)."""


class TooLarge(DomainError, status=413, title="Too large", kind="too-large"):
    """A bulk upload beyond the configured row limit (413)."""
