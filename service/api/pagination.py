"""List pages with a total, safe sorting by a whitelisted set of fields, and keyset cursors.

Two ways through a list: ``offset`` (simple, but a row inserted or deleted before the
window shifts it, so rows repeat or vanish between pages) and ``after``, a keyset cursor:
each page's ``next_after`` names the last row's sort key and id, and the next page starts
strictly after it. The record id is always the last sort key (the tie-breaker), so the
order is total and a row inserted between two pages is never served twice and never
makes another row vanish. A cursor is bound to its sort: reused with another sort, or on a
nullable sort field (NULLs order differently on SQLite and PostgreSQL), it is a 422.
"""

from __future__ import annotations

import base64
import binascii
import json
from collections.abc import Mapping, Sequence
from datetime import date, datetime
from enum import Enum
from typing import Annotated, Any, Generic, TypeVar

from fastapi import Depends, Query
from pydantic import BaseModel, Field
from sqlalchemy import ColumnElement, Select, and_, false, func, or_, select
from sqlalchemy import inspect as sa_inspect
from sqlalchemy.orm import Session
from sqlalchemy.orm.attributes import InstrumentedAttribute

from service.api.errors import Invalid
from service.api.ids import MAX_ID

T = TypeVar("T")
M = TypeVar("M", bound=BaseModel)


class Page(BaseModel, Generic[T]):
    """One page of a list: the items, the total matching the filters, and the window."""

    items: list[T]
    total: int
    limit: int
    offset: int
    next_after: str | None = Field(
        default=None,
        description="Cursor of the last item: send it as `after` for the next page "
        "(null when this page is not full, so no more rows follow).",
    )


class PageParams(BaseModel):
    """limit/offset/sort parsed from the query string."""

    limit: int
    offset: int
    sort: str | None
    after: str | None = None
    next_after: str | None = None  # set by paginate for the page it read


def page_of(schema: type[T], rows: Sequence[Any], total: int, params: PageParams) -> Page[T]:
    """A Page of rows shown through a read schema (from_attributes)."""
    return Page[T](
        items=[schema.model_validate(r) for r in rows],  # type: ignore[attr-defined]
        total=total,
        limit=params.limit,
        offset=params.offset,
        next_after=params.next_after,
    )


async def page_params(
    limit: Annotated[int, Query(ge=1, le=1000, description="Items per page.")] = 50,
    # No table holds more rows than ids (MAX_ID); a larger offset could not bind on SQLite.
    offset: Annotated[int, Query(ge=0, le=MAX_ID, description="Items to skip.")] = 0,
    sort: Annotated[
        str | None,
        Query(description="Comma-separated fields; a leading '-' sorts descending."),
    ] = None,
    after: Annotated[
        str | None,
        Query(
            max_length=2000,
            description="Keyset cursor: the `next_after` of the previous page. Pages never "
            "repeat or drop a row when rows are inserted between them (unlike offset).",
        ),
    ] = None,
) -> PageParams:
    """FastAPI dependency that reads the page window, the sort order and the cursor.

    Async because it does no I/O: a sync dependency costs a worker-thread hop per request.
    """
    return PageParams(limit=limit, offset=offset, sort=sort, after=after)


async def offset_page_params(
    limit: Annotated[int, Query(ge=1, le=1000, description="Items per page.")] = 50,
    offset: Annotated[int, Query(ge=0, le=MAX_ID, description="Items to skip.")] = 0,
) -> PageParams:
    """FastAPI dependency for lists computed in memory: limit and offset only."""
    return PageParams(limit=limit, offset=offset, sort=None)


PageDep = Annotated[PageParams, Depends(page_params)]
OffsetPageDep = Annotated[PageParams, Depends(offset_page_params)]


def _bad_cursor(message: str) -> Invalid:
    return Invalid(
        f"The 'after' cursor cannot be used: {message}.",
        errors=[{"field": "after", "in": "query", "message": message}],
    )


def _order(
    stmt: Select[Any], sort: str | None, columns: Mapping[str, Any], default: Any
) -> list[tuple[str, Any, bool]]:
    """The (name, column, descending) sort keys: the client's, then the default, then id."""
    keys: list[tuple[str, Any, bool]] = []
    for raw in (sort or "").split(","):
        name = raw.strip()
        if not name:
            continue
        desc = name.startswith("-")
        name = name.lstrip("-+")
        if name not in columns:
            allowed = ", ".join(sorted(columns))
            raise Invalid(
                f"Cannot sort by '{name}'; allowed: {allowed}.",
                errors=[{"field": "sort", "in": "query", "message": f"unknown field {name}"}],
            )
        keys.append((name, columns[name], desc))
    if not keys:
        element = getattr(default, "element", default)
        desc = getattr(getattr(default, "modifier", None), "__name__", "") == "desc_op"
        keys.append((getattr(element, "key", "default"), element, desc))
    entity = stmt.column_descriptions[0].get("entity")
    ident = getattr(entity, "id", None)
    if ident is not None and not any(col is ident for _, col, _ in keys):
        keys.append(("id", ident, False))  # the tie-breaker: the order is total
    return keys


def order_keys(
    stmt: Select[Any], sort: str | None, columns: Mapping[str, Any], default: Any
) -> list[tuple[str, Any, bool]]:
    """The (name, column, descending) keys paginate orders by (422 naming a bad field)."""
    return _order(stmt, sort, columns, default)


def check_keyset(keys: list[tuple[str, Any, bool]]) -> bool:
    """True when a keyset cursor can follow these sort keys (none can be empty)."""
    try:
        _check_keyset(keys)
    except Invalid:
        return False
    return True


def apply_sort(
    stmt: Select[Any], sort: str | None, columns: Mapping[str, Any], default: Any
) -> Select[Any]:
    """Order a query by client-chosen fields from a whitelist (422 naming the bad field)."""
    keys = _order(stmt, sort, columns, default)
    return stmt.order_by(*[col.desc() if desc else col.asc() for _, col, desc in keys])


def _plain(value: Any) -> Any:
    """A sort-key value as JSON: times and dates as ISO 8601, enums by value."""
    if isinstance(value, Enum):
        return value.value
    if isinstance(value, (datetime, date)):
        return value.isoformat()
    return value


def _typed(column: Any, value: Any) -> Any:
    """A cursor value back in the column's Python type."""
    if value is None:
        raise _bad_cursor("it names an empty sort value")
    kind = None
    # A TypeDecorator (UTCDateTime) may not name its Python type: its impl's then.
    for sql_type in (column.type, getattr(column.type, "impl", column.type)):
        try:
            kind = sql_type.python_type
            if kind is not object:  # a TypeDecorator names no type of its own
                break
        except (AttributeError, NotImplementedError):
            continue
    if kind is None or kind is object:
        return value
    try:
        if issubclass(kind, datetime):
            return datetime.fromisoformat(value)
        if issubclass(kind, date):
            return date.fromisoformat(value)
        if kind in (int, float, str) and not isinstance(value, kind):
            raise _bad_cursor("a value of the wrong type")
    except (TypeError, ValueError) as exc:
        raise _bad_cursor("a malformed value") from exc
    return value


def encode_cursor(sort: str | None, values: Sequence[Any]) -> str:
    """An opaque cursor: base64url of the sort and the last row's key values."""
    raw = json.dumps({"s": sort or "", "k": [_plain(v) for v in values]}, separators=(",", ":"))
    return base64.urlsafe_b64encode(raw.encode()).decode().rstrip("=")


def decode_cursor(cursor: str) -> tuple[str, list[Any]]:
    """The sort and key values of a cursor (422 for one we did not make)."""
    try:
        raw = base64.urlsafe_b64decode(cursor + "=" * (-len(cursor) % 4))
        body = json.loads(raw)
        sort, values = body["s"], body["k"]
    except (binascii.Error, ValueError, KeyError, TypeError) as exc:
        raise _bad_cursor("it is not a cursor this service made") from exc
    if not isinstance(sort, str) or not isinstance(values, list):
        raise _bad_cursor("it is not a cursor this service made")
    return sort, values


def _after(keys: list[tuple[str, Any, bool]], values: list[Any]) -> ColumnElement[bool]:
    """Rows strictly after the key values in this order (a lexicographic comparison)."""
    if len(values) != len(keys):
        raise _bad_cursor("it was made for another order")
    terms = []
    typed = [_typed(col, v) for (_, col, _), v in zip(keys, values, strict=True)]
    for i, (_, col, desc) in enumerate(keys):
        equal = [keys[j][1] == typed[j] for j in range(i)]
        beyond = col < typed[i] if desc else col > typed[i]
        terms.append(and_(*equal, beyond))
    return or_(false(), *terms)


def _check_keyset(keys: list[tuple[str, Any, bool]]) -> None:
    for name, col, _ in keys:
        column = getattr(col, "property", None)
        nullable = any(c.nullable for c in getattr(column, "columns", []))
        if not isinstance(col, InstrumentedAttribute) or nullable:
            raise _bad_cursor(f"the sort field '{name}' can be empty; page it with offset")


def _one_entity(stmt: Select[Any]) -> bool:
    described = stmt.column_descriptions
    return len(described) == 1 and described[0].get("expr") is described[0].get("entity")


def columns_of(model: type[Any]) -> list[InstrumentedAttribute[Any]]:
    """The mapped column attributes of a model, to select its rows without ORM objects."""
    found = _COLUMNS.get(model)
    if found is None:  # inspecting the mapper per list request cost as much as the statement
        found = _COLUMNS[model] = tuple(
            getattr(model, attr.key) for attr in sa_inspect(model).column_attrs
        )
    return list(found)


_COLUMNS: dict[type[Any], tuple[InstrumentedAttribute[Any], ...]] = {}


def paginate(
    session: Session,
    stmt: Select[Any],
    params: PageParams,
    columns: Mapping[str, Any],
    default: Any,
) -> tuple[Sequence[Any], int]:
    """Run a filtered query for one page; returns (rows, total) and sets params.next_after.

    The total counts every row matching the filters, not only those after the cursor.
    """
    # The count and plain-column pages run on the Core connection: no ORM result processing.
    counted = select(func.count()).select_from(stmt.order_by(None).subquery())
    total = session.connection().execute(counted).scalar() or 0
    keys = _order(stmt, params.sort, columns, default)
    window = stmt
    if params.after is not None:
        sort, values = decode_cursor(params.after)
        if sort != (params.sort or ""):
            raise _bad_cursor("it was made for another sort")
        _check_keyset(keys)
        window = window.where(_after(keys, values))
    ordered = window.order_by(*[col.desc() if desc else col.asc() for _, col, desc in keys])
    ordered = ordered.limit(params.limit).offset(params.offset)
    # One entity: ORM objects. Columns (see columns_of): plain rows, no identity map or
    # instrumentation, for lists answered straight from the rows.
    if _one_entity(stmt):
        rows: Sequence[Any] = session.scalars(ordered).all()
    else:
        rows = session.connection().execute(ordered).all()
    params.next_after = None
    if len(rows) == params.limit:
        try:
            _check_keyset(keys)
        except Invalid:
            return rows, int(total)  # a nullable sort: offset paging only
        last = rows[-1]
        params.next_after = encode_cursor(
            params.sort, [getattr(last, col.key) for _, col, _ in keys]
        )
    return rows, int(total)
