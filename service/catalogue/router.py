"""HTTP routes for the lamp catalogue."""

from __future__ import annotations

from typing import Annotated, Literal

from fastapi import APIRouter, Query, Request, Response, status
from pydantic import BaseModel

from service.api.auth import ReadKey, SessionDep, WriteKey
from service.api.bulk import EXPORT_RESPONSES, UPLOAD_OPENAPI, RawBodyDep, export_response
from service.api.ids import IdPath
from service.api.pagination import Page, PageDep, paginate
from service.api.preconditions import locate, versioned
from service.catalogue import bulk, service
from service.catalogue import repository as repo
from service.catalogue.models import LampType
from service.catalogue.schemas import (
    LAMP_TYPE_FIELDS,
    IncludeRetiredQ,
    LampTypeCreate,
    LampTypeRead,
    LampTypeUpdate,
)
from service.uploads.parse import read_upload

router = APIRouter(prefix="/lamp-types", tags=["lamp catalogue"])

TechnologyQ = Annotated[str | None, Query(description="Exact technology, e.g. led.")]
CodeQ = Annotated[str | None, Query(description="Code contains (any case).")]
MercuryQ = Annotated[bool | None, Query(description="Only lamps with (true) or without mercury.")]


class ImportSummary(BaseModel):
    """Rows read, created and updated by an import (all in one transaction)."""

    rows: int
    created: int
    updated: int


@router.get("", response_model=Page[LampTypeRead])
def list_lamp_types(
    session: SessionDep,
    _: ReadKey,
    page: PageDep,
    technology: TechnologyQ = None,
    code: CodeQ = None,
    contains_mercury: MercuryQ = None,
    include_retired: IncludeRetiredQ = False,
) -> Page[LampTypeRead]:
    """List lamp types (sort: code, id, technology, rated_watts, rated_life_h, unit_price)."""
    stmt = repo.lamp_type_query(technology, code, contains_mercury, include_retired)
    rows, total = paginate(session, stmt, page, repo.LAMP_TYPE_SORT, LampType.id)
    return Page(
        items=[service.to_read(r) for r in rows],
        total=total,
        limit=page.limit,
        offset=page.offset,
        next_after=page.next_after,
    )


@router.post("", response_model=LampTypeRead, status_code=status.HTTP_201_CREATED)
def create_lamp_type(
    body: LampTypeCreate, session: SessionDep, _: WriteKey, request: Request, response: Response
) -> LampTypeRead:
    """Create a lamp type; the answer shows the model numbers the forecasts will use."""
    lamp_type = service.create_lamp_type(session, body)
    locate(request, response, "get_lamp_type", lamp_type_id=lamp_type.id)
    return service.to_read(lamp_type)


@router.post("/import", response_model=ImportSummary, openapi_extra=UPLOAD_OPENAPI)
def import_lamp_types(
    body: RawBodyDep,
    session: SessionDep,
    _: WriteKey,
    on_duplicate: Annotated[
        Literal["error", "update"], Query(description="An existing code: error or update it.")
    ] = "error",
) -> ImportSummary:
    """Import lamp types from CSV (text/csv) or JSON (a list): all rows or none."""
    rows = read_upload(body, bulk.LAMP_TYPE_UPLOAD)
    result = bulk.import_lamp_types(session, rows, on_duplicate)
    return ImportSummary(rows=result.rows, created=result.created, updated=result.updated)


@router.get("/export", response_class=Response, responses=EXPORT_RESPONSES)
def export_lamp_types(
    session: SessionDep,
    _: ReadKey,
    format: Annotated[Literal["csv", "json"], Query(description="csv or json.")] = "csv",
    technology: TechnologyQ = None,
    code: CodeQ = None,
    contains_mercury: MercuryQ = None,
) -> Response:
    """Download lamp types as CSV or JSON, in the form the import takes back."""
    rows = bulk.export_lamp_types(session, technology, code, contains_mercury)
    return export_response(LAMP_TYPE_FIELDS, rows, format, "lamp-types")


@router.get(
    "/{lamp_type_id}",
    response_model=LampTypeRead,
    dependencies=[versioned(LampType, "lamp_type_id")],
)
def get_lamp_type(lamp_type_id: IdPath, session: SessionDep, _: ReadKey) -> LampTypeRead:
    """Read one lamp type with its resolved model."""
    return service.to_read(service.get_lamp_type(session, lamp_type_id))


@router.patch(
    "/{lamp_type_id}",
    response_model=LampTypeRead,
    dependencies=[versioned(LampType, "lamp_type_id")],
)
def update_lamp_type(
    lamp_type_id: IdPath, body: LampTypeUpdate, session: SessionDep, _: WriteKey
) -> LampTypeRead:
    """Change some fields of a lamp type."""
    return service.to_read(service.update_lamp_type(session, lamp_type_id, body))
