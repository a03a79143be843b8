"""Queries for the asset register."""

from __future__ import annotations

from typing import Any

from sqlalchemy import Select, func, select
from sqlalchemy.orm import Session, selectinload

from service.api.pagination import columns_of
from service.db.crud import filtered, value_taken
from service.register.models import Area, Fixture, LampPosition, Site

SITE_SORT = {
    "name": Site.name,
    "id": Site.id,
    "created_at": Site.created_at,
    "nominal_voltage_v": Site.nominal_voltage_v,
}


def site_query(
    name: str | None = None,
    time_zone: str | None = None,
    include_retired: bool = True,
    external_reference: str | None = None,
) -> Select[Any]:
    """Sites filtered by a name fragment (case-insensitive), time zone, retirement, reference."""
    return filtered(
        select(Site),
        equal=[(Site.external_reference, external_reference), (Site.time_zone, time_zone or None)],
        contains=[(Site.name, name)],
        retired=(Site.retired_at, include_retired),
    )


def site_name_taken(session: Session, name: str, exclude_id: int | None = None) -> bool:
    """True when another site already has this name."""
    return value_taken(session, Site.name, name, exclude_id)


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
    name: str | None = None,
    include_retired: bool = True,
) -> Select[Any]:
    """Areas filtered by site, access method, a name fragment (any case) and retirement."""
    return filtered(
        select(Area),
        equal=[(Area.site_id, site_id), (Area.access_method, access_method or None)],
        contains=[(Area.name, name)],
        retired=(Area.retired_at, include_retired),
    )


def area_name_taken(
    session: Session, site_id: int, name: str, exclude_id: int | None = None
) -> bool:
    """True when another area of the site already has this name."""
    return value_taken(session, Area.name, name, exclude_id, Area.site_id == site_id)


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
    by = [Fixture.site_id, Fixture.area_id, Fixture.lamp_type_id, Fixture.external_reference]
    return filtered(
        select(Fixture).options(selectinload(Fixture.positions)),
        equal=list(zip(by, (site_id, area_id, lamp_type_id, external_reference), strict=True)),
        contains=[(Fixture.tag, tag_contains)],
        retired=(Fixture.retired_at, include_retired),
    )


def tag_taken(session: Session, site_id: int, tag: str, exclude_id: int | None = None) -> bool:
    """True when another fixture of the site already has this tag."""
    return value_taken(session, Fixture.tag, tag, exclude_id, Fixture.site_id == site_id)


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
