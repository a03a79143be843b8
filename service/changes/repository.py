"""Change feed queries: the visible rows after a position, the head, pruning."""

from __future__ import annotations

from collections.abc import Sequence
from datetime import datetime

from sqlalchemy import ColumnElement, delete, literal_column, select, tuple_
from sqlalchemy.orm import Session

from service.changes.models import Change

# PostgreSQL: the oldest transaction still running (cluster-wide). Every change row whose
# transaction id is below it is final (committed or rolled back), so nothing can appear
# later in front of a row read now. Evaluated in the reading statement's own snapshot.
PG_HORIZON = "pg_snapshot_xmin(pg_current_snapshot())::text::bigint"


def _visible(session: Session) -> list[ColumnElement[bool]]:
    if session.get_bind().dialect.name == "postgresql":
        return [Change.xact_id < literal_column(PG_HORIZON)]
    return []  # SQLite: one writer at a time, ids follow commit order


def read_after(
    session: Session,
    after: tuple[int, int] | None,
    limit: int,
    types: Sequence[str] | None = None,
) -> list[Change]:
    """Up to `limit` visible changes after (xact_id, id), in (xact_id, id) order."""
    stmt = select(Change).where(*_visible(session))
    if after is not None:
        stmt = stmt.where(tuple_(Change.xact_id, Change.id) > tuple_(after[0], after[1]))
    if types:
        stmt = stmt.where(Change.resource_type.in_(list(types)))
    stmt = stmt.order_by(Change.xact_id, Change.id).limit(limit)
    return list(session.scalars(stmt))


def head(session: Session) -> Change | None:
    """The last visible change (where a new reader starting now begins)."""
    stmt = (
        select(Change)
        .where(*_visible(session))
        .order_by(Change.xact_id.desc(), Change.id.desc())
        .limit(1)
    )
    return session.scalars(stmt).first()


def prune_before(session: Session, cutoff: datetime) -> int:
    """Delete the changes made before `cutoff`; the number deleted."""
    result = session.execute(delete(Change).where(Change.changed_at < cutoff))
    return int(result.rowcount or 0)  # type: ignore[attr-defined]
