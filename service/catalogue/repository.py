"""Queries for the lamp catalogue."""

from __future__ import annotations

from typing import Any

from sqlalchemy import Select, select
from sqlalchemy.orm import Session

from service.catalogue.models import LampType
from service.db.crud import filtered, value_taken

LAMP_TYPE_SORT = {
    "code": LampType.code,
    "id": LampType.id,
    "technology": LampType.technology,
    "rated_watts": LampType.rated_watts,
    "rated_life_h": LampType.rated_life_h,
    "unit_price": LampType.unit_price,
    "created_at": LampType.created_at,
}


def lamp_type_query(
    technology: str | None = None,
    code: str | None = None,
    contains_mercury: bool | None = None,
    include_retired: bool = True,
) -> Select[Any]:
    """Lamp types filtered by technology, code fragment (any case), mercury and retirement."""
    return filtered(
        select(LampType),
        equal=[
            (LampType.technology, technology or None),
            (LampType.contains_mercury, contains_mercury),
        ],
        contains=[(LampType.code, code)],
        retired=(LampType.retired_at, include_retired),
    )


def code_taken(session: Session, code: str, exclude_id: int | None = None) -> bool:
    """True when another lamp type already has this code."""
    return value_taken(session, LampType.code, code, exclude_id)


def ids_by_code(session: Session) -> dict[str, int]:
    """Every lamp type's id by its code (one query)."""
    return {code: i for i, code in session.execute(select(LampType.id, LampType.code))}
