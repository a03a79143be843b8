"""List pages with a total, and safe sorting by a whitelisted set of fields."""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from typing import Annotated, Any, Generic, TypeVar

from fastapi import Depends, Query
from pydantic import BaseModel
from sqlalchemy import Select, func, select
from sqlalchemy.orm import Session

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


class PageParams(BaseModel):
    """limit/offset/sort parsed from the query string."""

    limit: int
    offset: int
    sort: str | None


def page_of(schema: type[T], rows: Sequence[Any], total: int, params: PageParams) -> Page[T]:
    """A Page of rows shown through a read schema (from_attributes)."""
    return Page[T](
        items=[schema.model_validate(r) for r in rows],  # type: ignore[attr-defined]
        total=total,
        limit=params.limit,
        offset=params.offset,
    )


def page_params(
    limit: Annotated[int, Query(ge=1, le=1000, description="Items per page.")] = 50,
    # No table holds more rows than ids (MAX_ID); a larger offset could not bind on SQLite.
    offset: Annotated[int, Query(ge=0, le=MAX_ID, description="Items to skip.")] = 0,
    sort: Annotated[
        str | None,
        Query(description="Comma-separated fields; a leading '-' sorts descending."),
    ] = None,
) -> PageParams:
    """FastAPI dependency that reads the page window and the sort order."""
    return PageParams(limit=limit, offset=offset, sort=sort)


PageDep = Annotated[PageParams, Depends(page_params)]


def apply_sort(
    stmt: Select[Any], sort: str | None, columns: Mapping[str, Any], default: Any
) -> Select[Any]:
    """Order a query by client-chosen fields from a whitelist (422 naming the bad field)."""
    if not sort:
        return stmt.order_by(default)
    order = []
    for raw in sort.split(","):
        name = raw.strip()
        desc = name.startswith("-")
        name = name.lstrip("-+")
        if name not in columns:
            allowed = ", ".join(sorted(columns))
            raise Invalid(
                f"Cannot sort by '{name}'; allowed: {allowed}.",
                errors=[{"field": "sort", "in": "query", "message": f"unknown field {name}"}],
            )
        col = columns[name]
        order.append(col.desc() if desc else col.asc())
    order.append(default)  # a stable tiebreak keeps pages from overlapping
    return stmt.order_by(*order)


def paginate(
    session: Session,
    stmt: Select[Any],
    params: PageParams,
    columns: Mapping[str, Any],
    default: Any,
) -> tuple[Sequence[Any], int]:
    """Run a filtered query for one page; returns (rows, total)."""
    total = session.scalar(select(func.count()).select_from(stmt.order_by(None).subquery())) or 0
    rows = session.scalars(
        apply_sort(stmt, params.sort, columns, default).limit(params.limit).offset(params.offset)
    ).all()
    return rows, int(total)
