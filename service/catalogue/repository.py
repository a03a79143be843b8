"""Queries for the lamp catalogue."""

from __future__ import annotations

from sqlalchemy import select
from sqlalchemy.orm import Session

from service.catalogue.models import LampType
from service.db.crud import ListQuery, sort_columns, value_taken

LAMP_TYPE_SORT = sort_columns(
    LampType, "code", "id", "technology", "rated_watts", "rated_life_h", "unit_price", "created_at"
)


#: Lamp types filtered by technology, code fragment (any case), mercury and retirement.
lamp_type_query = ListQuery(
    LampType, equal=("technology", "contains_mercury"), contains={"code": "code"}, retired=True
)


def code_taken(session: Session, code: str, exclude_id: int | None = None) -> bool:
    """True when another lamp type already has this code."""
    return value_taken(session, LampType.code, code, exclude_id)


def ids_by_code(session: Session) -> dict[str, int]:
    """Every lamp type's id by its code (one query)."""
    return {code: i for i, code in session.execute(select(LampType.id, LampType.code))}
