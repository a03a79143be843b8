"""Queries for the asset register."""

from __future__ import annotations

from typing import Any

from sqlalchemy import Select, select
from sqlalchemy.orm import Session

from service.register.models import Site

SITE_SORT = {
    "name": Site.name,
    "id": Site.id,
    "created_at": Site.created_at,
    "nominal_voltage_v": Site.nominal_voltage_v,
}


def site_query(name_contains: str | None = None, time_zone: str | None = None) -> Select[Any]:
    """Sites filtered by a name fragment (case-insensitive) and time zone."""
    stmt = select(Site)
    if name_contains:
        stmt = stmt.where(Site.name.ilike(f"%{name_contains}%"))
    if time_zone:
        stmt = stmt.where(Site.time_zone == time_zone)
    return stmt


def site_name_taken(session: Session, name: str, exclude_id: int | None = None) -> bool:
    """True when another site already has this name."""
    stmt = select(Site.id).where(Site.name == name)
    if exclude_id is not None:
        stmt = stmt.where(Site.id != exclude_id)
    return session.scalar(stmt) is not None
