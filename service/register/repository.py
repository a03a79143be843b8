"""Queries for the asset register."""

from __future__ import annotations

from typing import Any

from sqlalchemy import Select, func, select
from sqlalchemy.orm import Session, selectinload

from service.api.pagination import columns_of
from service.db.crud import ListQuery, sort_columns, value_taken
from service.register.models import Area, Fixture, LampPosition, Site

SITE_SORT = sort_columns(Site, "name", "id", "created_at", "nominal_voltage_v")


#: Sites filtered by a name fragment (case-insensitive), time zone, retirement, reference.
site_query = ListQuery(
    Site, equal=("external_reference", "time_zone"), contains={"name": "name"}, retired=True
)


def site_name_taken(session: Session, name: str, exclude_id: int | None = None) -> bool:
    """True when another site already has this name."""
    return value_taken(session, Site.name, name, exclude_id)


AREA_SORT = sort_columns(Area, "name", "id", "site_id", "access_method", "created_at")


#: Areas filtered by site, access method, a name fragment (any case) and retirement.
area_query = ListQuery(
    Area, equal=("site_id", "access_method"), contains={"name": "name"}, retired=True
)


def area_name_taken(
    session: Session, site_id: int, name: str, exclude_id: int | None = None
) -> bool:
    """True when another area of the site already has this name."""
    return value_taken(session, Area.name, name, exclude_id, Area.site_id == site_id)


FIXTURE_SORT = sort_columns(
    Fixture, "tag", "id", "site_id", "area_id", "lamp_type_id", "installed_on", "created_at"
)


_FIXTURE_FILTERS = ListQuery(
    Fixture,
    equal=("site_id", "area_id", "lamp_type_id", "external_reference"),
    contains={"tag": "tag"},
    retired=True,
    options=(selectinload(Fixture.positions),),
)


def fixture_query(
    site_id: int | None = None,
    area_id: int | None = None,
    lamp_type_id: int | None = None,
    tag: str | None = None,
    include_retired: bool = True,
    external_reference: str | None = None,
) -> Select[Any]:
    """Fixtures (with positions) filtered by site, area, lamp type, tag, retirement, reference."""
    return _FIXTURE_FILTERS(
        site_id=site_id,
        area_id=area_id,
        lamp_type_id=lamp_type_id,
        tag=tag,
        include_retired=include_retired,
        external_reference=external_reference,
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
