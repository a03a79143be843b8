"""HTTP routes for the lamp catalogue."""

from __future__ import annotations

from typing import Annotated, Literal

from fastapi import APIRouter, Query, Response
from pydantic import BaseModel

from service.api.auth import ReadKey, SessionDep, WriteKey
from service.api.bulk import EXPORT_RESPONSES, UPLOAD_OPENAPI, RawBodyDep, export_response
from service.api.resource_routes import Resource
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

router = APIRouter(tags=["lamp catalogue"])
LAMP_TYPE = Resource(
    collection="/lamp-types",
    id_name="lamp_type_id",
    model=LampType,
    read=LampTypeRead,
    shape=service.to_read,
    service=service,
)

TechnologyQ = Annotated[str | None, Query(description="Exact technology, e.g. led.")]
CodeQ = Annotated[str | None, Query(description="Code contains (any case).")]
MercuryQ = Annotated[bool | None, Query(description="Only lamps with (true) or without mercury.")]


class ImportSummary(BaseModel):
    """Rows read, created and updated by an import (all in one transaction)."""

    rows: int
    created: int
    updated: int


LAMP_TYPE.list_route(
    router,
    "list_lamp_types",
    "List lamp types (sort: code, id, technology, rated_watts, rated_life_h, unit_price).",
    {
        "technology": TechnologyQ,
        "code": CodeQ,
        "contains_mercury": MercuryQ,
        "include_retired": (IncludeRetiredQ, False),
    },
    (repo.lamp_type_query, repo.LAMP_TYPE_SORT),
)
LAMP_TYPE.create_route(
    router,
    ("create_lamp_type", "get_lamp_type"),
    "Create a lamp type; the answer shows the model numbers the forecasts will use.",
    LampTypeCreate,
)


@router.post("/lamp-types/import", response_model=ImportSummary, openapi_extra=UPLOAD_OPENAPI)
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


@router.get("/lamp-types/export", response_class=Response, responses=EXPORT_RESPONSES)
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


LAMP_TYPE.get_route(
    router,
    "get_lamp_type",
    "Read one lamp type with its resolved model.",
)
LAMP_TYPE.patch_route(
    router,
    "update_lamp_type",
    "Change some fields of a lamp type.",
    LampTypeUpdate,
)
