"""Queries for the asset register."""

from __future__ import annotations

from functools import lru_cache
from typing import Any

from sqlalchemy import Select, bindparam, func, select
from sqlalchemy.orm import Session, selectinload

from service.api.pagination import PageParams, check_keyset, columns_of, encode_cursor, order_keys
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


_FIXTURE_BASE = select(Fixture)


def fixture_order(sort: str | None) -> tuple[tuple[str, bool], ...]:
    """The (field, descending) sort keys of a fixture list (422 on a field not allowed)."""
    keys = order_keys(_FIXTURE_BASE, sort, FIXTURE_SORT, Fixture.id)
    return tuple((name, desc) for name, _, desc in keys)


@lru_cache(maxsize=256)
def fixture_list_statements(
    filters: tuple[str, ...], order: tuple[tuple[str, bool], ...]
) -> tuple[Select[Any], Select[Any]]:
    """(count, page) of the fixture list for these filters (by name) and sort keys.

    Built once per shape with bind parameters (filters by name, limit, offset), so a
    request neither builds a statement nor computes its cache key (P3 of the speed issue).
    """
    where = _FIXTURE_FILTERS.bound_where(filters)
    count = select(func.count()).select_from(Fixture).where(*where)
    columns = {**FIXTURE_SORT, "id": Fixture.id}
    ordered = [columns[n].desc() if desc else columns[n].asc() for n, desc in order]
    page = (
        select(*columns_of(Fixture))
        .where(*where)
        .order_by(*ordered)
        .limit(bindparam("limit"))
        .offset(bindparam("offset"))
    )
    return count, page


@lru_cache(maxsize=1)
def _positions_statement() -> Select[Any]:
    return (
        select(*columns_of(LampPosition))
        .where(LampPosition.fixture_id.in_(bindparam("ids", expanding=True)))
        .order_by(LampPosition.fixture_id, LampPosition.position_no)
    )


def positions_rows(session: Session, fixture_ids: list[int]) -> dict[int, list[dict[str, Any]]]:
    """As positions_by_fixture, through one statement built once (bound ids)."""
    found: dict[int, list[dict[str, Any]]] = {}
    if not fixture_ids:
        return found
    result = session.connection().execute(_positions_statement(), {"ids": fixture_ids})
    keys = tuple(result.keys())
    at = keys.index("fixture_id")
    for row in result:
        found.setdefault(row[at], []).append(dict(zip(keys, row, strict=True)))
    return found


@lru_cache(maxsize=256)
def _cursor_follows(order: tuple[tuple[str, bool], ...]) -> bool:
    columns = {**FIXTURE_SORT, "id": Fixture.id}
    return check_keyset([(n, columns[n], desc) for n, desc in order])


def fixture_list_page(
    session: Session, given: dict[str, Any], page: PageParams
) -> tuple[list[dict[str, Any]], int]:
    """One page of fixtures (no cursor) as plain dicts and the total; sets page.next_after.

    `given` are fixture_query's filters by name. The same rows, total and cursor as
    paginate over as_rows(fixture_query(**given)).
    """
    filters = _FIXTURE_FILTERS.binds(**given)  # "tag" as its LIKE pattern, "active" unbound
    order = fixture_order(page.sort)
    names = tuple(filters)
    count, stmt = fixture_list_statements(names, order)
    binds = {k: v for k, v in filters.items() if k != "active"}
    conn = session.connection()
    total = int(conn.execute(count, binds).scalar() or 0)
    result = conn.execute(stmt, {**binds, "limit": page.limit, "offset": page.offset})
    keys = tuple(result.keys())
    items = [dict(zip(keys, row, strict=True)) for row in result]
    page.next_after = None
    if len(items) == page.limit and _cursor_follows(order):
        last = items[-1]
        page.next_after = encode_cursor(page.sort, [last[n] for n, _ in order])
    return items, total
