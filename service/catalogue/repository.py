"""Queries for the lamp catalogue."""

from __future__ import annotations

from typing import Any

from sqlalchemy import Select, select
from sqlalchemy.orm import Session

from service.catalogue.models import LampType

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
    code_contains: str | None = None,
    contains_mercury: bool | None = None,
    include_retired: bool = True,
) -> Select[Any]:
    """Lamp types filtered by technology, code fragment (any case), mercury and retirement."""
    stmt = select(LampType)
    if not include_retired:
        stmt = stmt.where(LampType.retired_at.is_(None))
    if technology:
        stmt = stmt.where(LampType.technology == technology)
    if code_contains:
        stmt = stmt.where(LampType.code.ilike(f"%{code_contains}%"))
    if contains_mercury is not None:
        stmt = stmt.where(LampType.contains_mercury == contains_mercury)
    return stmt


def code_taken(session: Session, code: str, exclude_id: int | None = None) -> bool:
    """True when another lamp type already has this code."""
    stmt = select(LampType.id).where(LampType.code == code)
    if exclude_id is not None:
        stmt = stmt.where(LampType.id != exclude_id)
    return session.scalar(stmt) is not None


def ids_by_code(session: Session) -> dict[str, int]:
    """Every lamp type's id by its code (one query)."""
    return {code: i for i, code in session.execute(select(LampType.id, LampType.code))}
