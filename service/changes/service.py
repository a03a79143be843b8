"""Change feed rules: cursors, the retention window (410 past it), pruning."""

from __future__ import annotations

from collections.abc import Sequence
from datetime import datetime, timedelta

from sqlalchemy.orm import Session

from service.api.errors import DomainError, Invalid
from service.changes import repository
from service.changes.cursors import Cursor, decode, encode
from service.changes.models import Change
from service.changes.schemas import ChangePage, ChangeRead
from service.config import get_settings
from service.db.base import utcnow


class Gone(DomainError):
    """A feed cursor older than the retention: its changes may be pruned (410)."""

    status, title, kind = 410, "Gone", "cursor-expired"


def cursor_of(change: Change) -> str:
    """The opaque cursor just after a change."""
    return encode(Cursor(change.xact_id, change.id, int(change.changed_at.timestamp())))


def retention_cutoff(now: datetime | None = None) -> datetime:
    """Changes before this moment may be pruned."""
    days = get_settings().change_retention_days
    return (now or utcnow()) - timedelta(days=days)


def parse_after(after: str | None, now: datetime | None = None) -> tuple[int, int] | None:
    """The (xact_id, id) of a cursor; 422 if not ours, 410 if past the retention."""
    if after is None:
        return None
    try:
        cur = decode(after)
    except ValueError as exc:
        raise Invalid(
            "after is not a cursor from this feed",
            errors=[{"field": "after", "in": "query", "message": "not a feed cursor"}],
        ) from exc
    if cur.epoch_s < retention_cutoff(now).timestamp():
        raise Gone(
            "the cursor is older than the feed's retention; start again without `after` "
            "and reconcile by listing the resources",
            errors=[{"field": "after", "in": "query", "message": "older than the retention"}],
        )
    return cur.xact_id, cur.change_id


def to_read(change: Change) -> ChangeRead:
    """A change as the API shows it."""
    return ChangeRead(
        cursor=cursor_of(change),
        id=change.id,
        resource_type=change.resource_type,
        resource_id=change.resource_id,
        kind=change.kind,
        version=change.version,
        changed_at=change.changed_at,
        body=change.body,
    )


def feed(
    session: Session, after: str | None, limit: int, types: Sequence[str] | None = None
) -> ChangePage:
    """One page of changes after a cursor, in visibility order."""
    position = parse_after(after)
    rows = repository.read_after(session, position, limit + 1, types)
    more = len(rows) > limit
    items = [to_read(c) for c in rows[:limit]]
    return ChangePage(items=items, next_cursor=items[-1].cursor if items else after, has_more=more)


def prune(session: Session, now: datetime | None = None) -> int:
    """Delete changes past the retention; the number deleted."""
    return repository.prune_before(session, retention_cutoff(now))
