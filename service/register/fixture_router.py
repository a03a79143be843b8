"""HTTP routes for fixtures and lamp positions."""

from __future__ import annotations

from typing import Annotated, Any, Literal

from fastapi import APIRouter, Query, Response
from pydantic import BaseModel
from sqlalchemy.orm import Session

import service.register.fixture_bulk as fixture_bulk
import service.register.fixture_export as fixture_export
from service.api.auth import ReadKey, SessionDep, WriteKey
from service.api.bulk import EXPORT_RESPONSES, UPLOAD_OPENAPI, RawBodyDep, export_response
from service.api.ids import MAX_ID, IdPath
from service.api.lookups import ExternalReferenceQ
from service.api.pagination import PageParams, paginate
from service.api.resource_routes import Resource
from service.catalogue.schemas import IncludeRetiredQ
from service.register import fixtures
from service.register import repository as repo
from service.register.models import Fixture, LampPosition
from service.register.schemas import (
    FixtureCreate,
    FixtureRead,
    FixtureUpdate,
    PositionRead,
    PositionUpdate,
)
from service.uploads.parse import read_upload

router = APIRouter(tags=["register"])
FIXTURE = Resource(
    collection="/fixtures", id_name="fixture_id", model=Fixture, read=FixtureRead, service=fixtures
)
POSITION = Resource(
    collection="/positions",
    id_name="position_id",
    model=LampPosition,
    read=PositionRead,
    service=fixtures,
)

SiteQ = Annotated[int | None, Query(ge=1, le=MAX_ID, description="Only fixtures of this site.")]
AreaQ = Annotated[int | None, Query(ge=1, le=MAX_ID, description="Only fixtures of this area.")]
LampTypeQ = Annotated[
    int | None, Query(ge=1, le=MAX_ID, description="Only fixtures of this lamp type.")
]
TagQ = Annotated[str | None, Query(description="Tag contains (any case).")]


class FixtureImportSummary(BaseModel):
    """Rows read, fixtures created and updated, lamp positions added by an import."""

    rows: int
    created: int
    updated: int
    positions_created: int


def _fixture_page(
    session: Session, filters: dict[str, Any], page: PageParams
) -> tuple[list[dict[str, Any]], int]:
    # Plain dicts, not ORM objects, from statements built once per filter/sort shape (P3
    # of the speed issue: ORM loading, then statement building, were most of its time).
    if page.after is None:
        items, total = repo.fixture_list_page(session, filters, page)
    else:  # a keyset cursor: its WHERE holds the cursor's values, so built per request
        stmt = repo.as_rows(repo.fixture_query(**filters))
        rows, total = paginate(session, stmt, page, repo.FIXTURE_SORT, Fixture.id)
        items = [dict(r._mapping) for r in rows]
    positions = repo.positions_rows(session, [item["id"] for item in items])
    for item in items:
        item["positions"] = positions.get(item["id"], [])
    return items, total


FIXTURE.list_route(
    router,
    "list_fixtures",
    "List fixtures with their positions (sort: tag, id, site_id, area_id, installed_on).",
    {
        "site_id": SiteQ,
        "area_id": AreaQ,
        "lamp_type_id": LampTypeQ,
        "tag": TagQ,
        "include_retired": (IncludeRetiredQ, False),
        "external_reference": ExternalReferenceQ,
    },
    (dict, repo.FIXTURE_SORT),
    _fixture_page,
    plain=True,
)
FIXTURE.create_route(
    router,
    ("create_fixture", "get_fixture"),
    "Create a fixture and its lamp positions.",
    FixtureCreate,
)


@router.post("/fixtures/import", response_model=FixtureImportSummary, openapi_extra=UPLOAD_OPENAPI)
def import_fixtures(
    body: RawBodyDep,
    session: SessionDep,
    _: WriteKey,
    on_duplicate: Annotated[
        Literal["error", "update"], Query(description="A tag the site has: error or update it.")
    ] = "error",
) -> FixtureImportSummary:
    """Import fixtures from CSV (text/csv) or JSON (a list), by site, area and lamp type names.

    All rows or none: any bad row answers 422 listing every bad row.
    """
    rows = read_upload(body, fixture_bulk.FIXTURE_UPLOAD)
    r = fixture_bulk.import_fixtures(session, rows, on_duplicate)
    return FixtureImportSummary(
        rows=r.rows, created=r.created, updated=r.updated, positions_created=r.positions_created
    )


@router.get("/fixtures/export", response_class=Response, responses=EXPORT_RESPONSES)
def export_fixtures(
    session: SessionDep,
    _: ReadKey,
    format: Annotated[Literal["csv", "json"], Query(description="csv or json.")] = "csv",
    site_id: SiteQ = None,
    area_id: AreaQ = None,
    lamp_type_id: LampTypeQ = None,
    tag: TagQ = None,
) -> Response:
    """Download fixtures as CSV or JSON, in the form the import takes back."""
    rows = fixture_export.export_fixtures(
        session, site_id=site_id, area_id=area_id, lamp_type_id=lamp_type_id, tag_contains=tag
    )
    return export_response(fixture_bulk.FIXTURE_COLUMNS, rows, format, "fixtures")


FIXTURE.get_route(router, "get_fixture", "Read one fixture with its positions.")
FIXTURE.patch_route(
    router,
    "update_fixture",
    "Change some fields of a fixture; positions follow lamps_per_fixture.",
    FixtureUpdate,
)
FIXTURE.delete_route(
    router,
    "delete_fixture",
    "Delete a fixture with its positions.",
)


@router.get("/fixtures/{fixture_id}/positions", response_model=list[PositionRead])
def list_positions(fixture_id: IdPath, session: SessionDep, _: ReadKey) -> list[PositionRead]:
    """The lamp positions of a fixture and when their lamps went in."""
    return [PositionRead.model_validate(p) for p in fixtures.list_positions(session, fixture_id)]


POSITION.patch_route(
    router,
    "update_position",
    "Correct when a position's lamp went in and the burn hours it had then.",
    PositionUpdate,
)
