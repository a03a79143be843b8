"""HTTP route of the change feed."""

from __future__ import annotations

from typing import Annotated, Any

from fastapi import APIRouter, Query

from service.api.auth import ReadKey, SessionDep
from service.api.errors import Invalid
from service.changes import service
from service.changes.schemas import ChangePage, ResourceType

router = APIRouter(tags=["changes"])


def parse_types(types: str | None) -> list[str] | None:
    """The comma-separated resource types of the `types` filter; 422 for an unknown one."""
    if types is None or not types.strip():
        return None
    known = {t.value for t in ResourceType}
    wanted = [t.strip() for t in types.split(",") if t.strip()]
    bad = [t for t in wanted if t not in known]
    if bad:
        raise Invalid(
            f"unknown resource types: {', '.join(bad)}",
            errors=[
                {
                    "field": "types",
                    "in": "query",
                    "message": f"each of: {', '.join(sorted(known))}",
                }
            ],
        )
    return wanted


# Documented with the shared problem schema by service.api.openapi (a route's own status).
GONE: dict[int | str, dict[str, Any]] = {
    410: {
        "description": "The cursor is older than the feed's retention: reconcile by "
        "listing the resources, then start again without `after`."
    }
}


@router.get("/changes", response_model=ChangePage, responses=GONE)
def list_changes(
    session: SessionDep,
    _: ReadKey,
    after: Annotated[
        str | None,
        Query(max_length=200, description="A cursor from an earlier answer; omit to start."),
    ] = None,
    limit: Annotated[int, Query(ge=1, le=1000, description="Changes per page.")] = 100,
    types: Annotated[
        str | None,
        Query(
            max_length=500, description="Comma-separated resource types, e.g. work_order,fixture."
        ),
    ] = None,
) -> ChangePage:
    """Changes in the order they became visible: never skips a later-committed earlier write.

    Poll with the last `next_cursor`. A cursor older than the retention
    (`change_retention_days`) answers 410: reconcile by listing, then start afresh.
    """
    return service.feed(session, after, limit, parse_types(types))
