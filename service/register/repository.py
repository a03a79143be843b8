"""Queries for the asset register."""

from __future__ import annotations

from typing import Any

from sqlalchemy import Select, func, select
from sqlalchemy.orm import Session, selectinload

from service.api.pagination import columns_of
from service.register.models import Area, Fixture, LampPosition, Site

SITE_SORT = {
    "name": Site.name,
    "id": Site.id,
    "created_at": Site.created_at,
    "nominal_voltage_v": Site.nominal_voltage_v,
}


def site_query(
    name_contains: str | None = None,
    time_zone: str | None = None,
    include_retired: bool = True,
    external_reference: str | None = None,
) -> Select[Any]:
    """Sites filtered by a name fragment (case-insensitive), time zone, retirement, reference."""
    stmt = select(Site)
    if external_reference is not None:
        stmt = stmt.where(Site.external_reference == external_reference)
    if not include_retired:
        stmt = stmt.where(Site.retired_at.is_(None))
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


AREA_SORT = {
    "name": Area.name,
    "id": Area.id,
    "site_id": Area.site_id,
    "access_method": Area.access_method,
    "created_at": Area.created_at,
}


def area_query(
    site_id: int | None = None,
    access_method: str | None = None,
    name_contains: str | None = None,
    include_retired: bool = True,
) -> Select[Any]:
    """Areas filtered by site, access method, a name fragment (any case) and retirement."""
    stmt = select(Area)
    if not include_retired:
        stmt = stmt.where(Area.retired_at.is_(None))
    if site_id is not None:
        stmt = stmt.where(Area.site_id == site_id)
    if access_method:
        stmt = stmt.where(Area.access_method == access_method)
    if name_contains:
        stmt = stmt.where(Area.name.ilike(f"%{name_contains}%"))
    return stmt


def area_name_taken(
    session: Session, site_id: int, name: str, exclude_id: int | None = None
) -> bool:
    """True when another area of the site already has this name."""
    stmt = select(Area.id).where(Area.site_id == site_id, Area.name == name)
    if exclude_id is not None:
        stmt = stmt.where(Area.id != exclude_id)
    return session.scalar(stmt) is not None


FIXTURE_SORT = {
    "tag": Fixture.tag,
    "id": Fixture.id,
    "site_id": Fixture.site_id,
    "area_id": Fixture.area_id,
    "lamp_type_id": Fixture.lamp_type_id,
    "installed_on": Fixture.installed_on,
    "created_at": Fixture.created_at,
}


def fixture_query(
    site_id: int | None = None,
    area_id: int | None = None,
    lamp_type_id: int | None = None,
    tag_contains: str | None = None,
    include_retired: bool = True,
    external_reference: str | None = None,
) -> Select[Any]:
    """Fixtures (with positions) filtered by site, area, lamp type, tag, retirement, reference."""
    stmt = select(Fixture).options(selectinload(Fixture.positions))
    if external_reference is not None:
        stmt = stmt.where(Fixture.external_reference == external_reference)
    if not include_retired:
        stmt = stmt.where(Fixture.retired_at.is_(None))
    if site_id is not None:
        stmt = stmt.where(Fixture.site_id == site_id)
    if area_id is not None:
        stmt = stmt.where(Fixture.area_id == area_id)
    if lamp_type_id is not None:
        stmt = stmt.where(Fixture.lamp_type_id == lamp_type_id)
    if tag_contains:
        stmt = stmt.where(Fixture.tag.ilike(f"%{tag_contains}%"))
    return stmt


def tag_taken(session: Session, site_id: int, tag: str, exclude_id: int | None = None) -> bool:
    """True when another fixture of the site already has this tag."""
    stmt = select(Fixture.id).where(Fixture.site_id == site_id, Fixture.tag == tag)
    if exclude_id is not None:
        stmt = stmt.where(Fixture.id != exclude_id)
    return session.scalar(stmt) is not None


def positions_of(session: Session, fixture_id: int) -> list[LampPosition]:
    """A fixture's lamp positions in order."""
    stmt = (
        select(LampPosition)
        .where(LampPosition.fixture_id == fixture_id)
        .order_by(LampPosition.position_no)
    )
    return list(session.scalars(stmt))


def fixture_count_in_area(session: Session, area_id: int) -> int:
    """How many fixtures an area holds."""
    return int(session.scalar(select(func.count()).where(Fixture.area_id == area_id)) or 0)


def fixtures_using_lamp_type(session: Session, lamp_type_id: int) -> int:
    """How many fixtures hold this lamp type."""
    stmt = select(func.count()).where(Fixture.lamp_type_id == lamp_type_id)
    return int(session.scalar(stmt) or 0)


def as_rows(stmt: Select[Any]) -> Select[Any]:
    """A fixture query (fixture_query) selecting the fixtures' columns, not ORM objects."""
    rows = select(*columns_of(Fixture))
    return rows if stmt.whereclause is None else rows.where(stmt.whereclause)


def positions_by_fixture(
    session: Session, fixture_ids: list[int]
) -> dict[int, list[dict[str, Any]]]:
    """The lamp positions of some fixtures as plain rows, per fixture in position order."""
    found: dict[int, list[dict[str, Any]]] = {}
    if not fixture_ids:
        return found
    stmt = (
        select(*columns_of(LampPosition))
        .where(LampPosition.fixture_id.in_(fixture_ids))
        .order_by(LampPosition.fixture_id, LampPosition.position_no)
    )
    for row in session.execute(stmt):
        found.setdefault(row.fixture_id, []).append(dict(row._mapping))
    return found
