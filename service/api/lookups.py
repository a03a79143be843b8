"""External references: the id a client's own system (a CMMS) keeps for our records.

Sites, fixtures and work orders carry an optional ``external_reference``, unique within
each resource type when set (a unique index per table, migration 0014; NULLs never
clash). Lists filter by it exactly; a clash is a 409 naming the field, checked before the
write, with the index deciding between two requests at once (its IntegrityError is a 409).
"""

from __future__ import annotations

from typing import Annotated, Any

from fastapi import Query
from sqlalchemy import select
from sqlalchemy.orm import Session

from service.api.errors import Conflict

MAX_LENGTH = 200

ExternalReferenceQ = Annotated[
    str | None,
    Query(
        min_length=1,
        max_length=MAX_LENGTH,
        description="Exact external reference (the id your own system keeps for the record).",
    ),
]


def refuse_taken_reference(
    session: Session, model: type[Any], value: str | None, what: str, exclude_id: int | None = None
) -> None:
    """409 when another record of this type already has the external reference."""
    if value is None:
        return
    stmt = select(model.id).where(model.external_reference == value)
    if exclude_id is not None:
        stmt = stmt.where(model.id != exclude_id)
    other = session.scalar(stmt.limit(1))
    if other is not None:
        raise Conflict(
            f"{what} {other} already has the external reference '{value}'.",
            errors=[{"field": "external_reference", "in": "body", "message": "already used"}],
        )
