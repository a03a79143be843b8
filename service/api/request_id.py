"""The request id: taken from a sane X-Request-ID, else made; kept for the request's context."""

from __future__ import annotations

import re
import uuid
from contextvars import ContextVar

HEADER = "x-request-id"
# Ids a caller may choose: short and printable, so a log line cannot be forged through it.
_SANE = re.compile(r"^[A-Za-z0-9._:-]{1,128}$")

current: ContextVar[str | None] = ContextVar("request_id", default=None)


def accept_or_make(raw: str | None) -> str:
    """The caller's id when it is sane, else a new random one (32 hex digits)."""
    if raw is not None and _SANE.match(raw):
        return raw
    return uuid.uuid4().hex
