"""HTTP routes for fixtures and lamp positions."""

from __future__ import annotations

from typing import Annotated, Literal

from fastapi import APIRouter, Query, Request, Response, status
from pydantic import BaseModel

import service.register.fixture_bulk as fixture_bulk
import service.register.fixture_export as fixture_export
from service.api.auth import ReadKey, SessionDep, WriteKey
from service.api.bulk import EXPORT_RESPONSES, UPLOAD_OPENAPI, RawBodyDep, export_response
from service.api.ids import MAX_ID, IdPath
from service.api.lookups import ExternalReferenceQ
from service.api.pagination import Page, PageDep, page_of, paginate
from service.api.preconditions import locate, versioned
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


@router.get("/fixtures", response_model=Page[FixtureRead])
def list_fixtures(
    session: SessionDep,
    _: ReadKey,
    page: PageDep,
    site_id: SiteQ = None,
    area_id: AreaQ = None,
    lamp_type_id: LampTypeQ = None,
    tag: TagQ = None,
    include_retired: IncludeRetiredQ = False,
    external_reference: ExternalReferenceQ = None,
) -> Page[FixtureRead]:
    """List fixtures with their positions (sort: tag, id, site_id, area_id, installed_on)."""
    stmt = repo.fixture_query(
        site_id, area_id, lamp_type_id, tag, include_retired, external_reference
    )
    # Plain rows, not ORM objects: the list is answered straight from them (P3 of the
    # speed issue; ORM loading was the largest part of this route's time).
    rows, total = paginate(session, repo.as_rows(stmt), page, repo.FIXTURE_SORT, Fixture.id)
    positions = repo.positions_by_fixture(session, [r.id for r in rows])
    items = [{**r._mapping, "positions": positions.get(r.id, [])} for r in rows]
    return page_of(FixtureRead, items, total, page)


@router.post("/fixtures", response_model=FixtureRead, status_code=status.HTTP_201_CREATED)
def create_fixture(
    body: FixtureCreate, session: SessionDep, _: WriteKey, request: Request, response: Response
) -> FixtureRead:
    """Create a fixture and its lamp positions."""
    fixture = fixtures.create_fixture(session, body)
    locate(request, response, "get_fixture", fixture_id=fixture.id)
    return FixtureRead.model_validate(fixture)


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


@router.get(
    "/fixtures/{fixture_id}",
    response_model=FixtureRead,
    dependencies=[versioned(Fixture, "fixture_id")],
)
def get_fixture(fixture_id: IdPath, session: SessionDep, _: ReadKey) -> FixtureRead:
    """Read one fixture with its positions."""
    return FixtureRead.model_validate(fixtures.get_fixture(session, fixture_id))


@router.patch(
    "/fixtures/{fixture_id}",
    response_model=FixtureRead,
    dependencies=[versioned(Fixture, "fixture_id")],
)
def update_fixture(
    fixture_id: IdPath, body: FixtureUpdate, session: SessionDep, _: WriteKey
) -> FixtureRead:
    """Change some fields of a fixture; positions follow lamps_per_fixture."""
    return FixtureRead.model_validate(fixtures.update_fixture(session, fixture_id, body))


@router.delete(
    "/fixtures/{fixture_id}",
    status_code=status.HTTP_204_NO_CONTENT,
    dependencies=[versioned(Fixture, "fixture_id")],
)
def delete_fixture(fixture_id: IdPath, session: SessionDep, _: WriteKey) -> Response:
    """Delete a fixture with its positions."""
    fixtures.delete_fixture(session, fixture_id)
    return Response(status_code=status.HTTP_204_NO_CONTENT)


@router.get("/fixtures/{fixture_id}/positions", response_model=list[PositionRead])
def list_positions(fixture_id: IdPath, session: SessionDep, _: ReadKey) -> list[PositionRead]:
    """The lamp positions of a fixture and when their lamps went in."""
    return [PositionRead.model_validate(p) for p in fixtures.list_positions(session, fixture_id)]


@router.patch(
    "/positions/{position_id}",
    response_model=PositionRead,
    dependencies=[versioned(LampPosition, "position_id")],
)
def update_position(
    position_id: IdPath, body: PositionUpdate, session: SessionDep, _: WriteKey
) -> PositionRead:
    """Correct when a position's lamp went in and the burn hours it had then."""
    return PositionRead.model_validate(fixtures.update_position(session, position_id, body))
