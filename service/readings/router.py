"""HTTP routes for burn-hour records, voltage readings and position ages."""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass
from datetime import UTC, datetime
from typing import Annotated, Any

from fastapi import APIRouter, Depends, Query, Request, Response, status
from pydantic import BaseModel
from sqlalchemy import select
from sqlalchemy.orm import Session

from service.api.auth import ReadKey, SessionDep, WriteKey
from service.api.bulk import UPLOAD_OPENAPI, RawBody, RawBodyDep
from service.api.errors import Invalid
from service.api.ids import IdQuery
from service.api.pagination import OffsetPageDep, Page, PageDep, page_of, paginate
from service.api.resource_routes import endpoint, param
from service.api.times import Timestamp
from service.readings import burn_hours, voltage_upload
from service.readings.ages import position_ages
from service.readings.models import BurnHourRecord, VoltageReading
from service.readings.schemas import (
    BulkResult,
    BurnHourCreate,
    BurnHourRead,
    PositionAgeRead,
    PositionAgesPage,
    VoltageReadingCreate,
    VoltageReadingRead,
)
from service.uploads.parse import columns_from_dicts, read_upload

router = APIRouter(tags=["readings"])

BURN_SORT = {"id": BurnHourRecord.id, "period_end": BurnHourRecord.period_end}
VOLT_SORT = {"id": VoltageReading.id, "measured_at": VoltageReading.measured_at}


@dataclass(frozen=True)
class Scope:
    """The site, area and fixture filters the reading lists share."""

    site_id: int | None
    area_id: int | None
    fixture_id: int | None


def _scope(site_id: IdQuery = None, area_id: IdQuery = None, fixture_id: IdQuery = None) -> Scope:
    return Scope(site_id, area_id, fixture_id)


ScopeDep = Annotated[Scope, Depends(_scope)]


def _scope_at(
    site_id: IdQuery = None,
    area_id: IdQuery = None,
    fixture_id: IdQuery = None,
    at: Annotated[Timestamp | None, Query(description="Moment (default now).")] = None,
) -> tuple[Scope, datetime | None]:
    return Scope(site_id, area_id, fixture_id), at


ScopeAtDep = Annotated[tuple[Scope, datetime | None], Depends(_scope_at)]


def _filters(model: Any, scope: Scope) -> Any:
    stmt = select(model)
    if scope.site_id is not None:
        stmt = stmt.where(model.site_id == scope.site_id)
    if scope.area_id is not None:
        stmt = stmt.where(model.area_id == scope.area_id)
    if scope.fixture_id is not None:
        stmt = stmt.where(model.fixture_id == scope.fixture_id)
    return stmt


def _latest(session: Session, model: Any, body: BurnHourCreate | VoltageReadingCreate) -> Any:
    stmt = _filters(model, Scope(None, body.area_id, body.fixture_id))
    if body.area_id is None:
        stmt = stmt.where(model.area_id.is_(None))
    return session.scalars(stmt.order_by(model.id.desc()).limit(1)).one()


def _reading_routes(
    kind: tuple[str, str, Any, type[BaseModel]],
    upload_doc: str,
    list_doc: str,
    ingest: tuple[Any, Callable[[Session, Any], int]],
    sort: dict[str, Any],
) -> None:
    """POST <path>/bulk (upload_<name>) and GET <path> (list_<name>) for one reading kind.

    kind is (path, name, ORM model, read schema); ingest is (upload spec, ingest function).
    """
    path, name, model, read = kind
    spec, store = ingest

    def upload(
        body: RawBody, session: Session, request: Request, response: Response, **_: Any
    ) -> Any:
        cols = read_upload(body, spec)
        response.headers["Location"] = str(request.url_for(f"list_{name}"))
        return BulkResult(stored=store(session, cols))

    def listing(scope: Scope, session: Session, page: Any, **_: Any) -> Any:
        rows, total = paginate(session, _filters(model, scope), page, sort, model.id)
        return page_of(read, rows, total, page)

    writer = [param("body", RawBodyDep), param("session", SessionDep), param("_", WriteKey)]
    router.add_api_route(
        f"{path}/bulk",
        endpoint(
            f"upload_{name}",
            upload_doc,
            [*writer, param("request", Request), param("response", Response)],
            upload,
        ),
        methods=["POST"],
        response_model=BulkResult,
        status_code=status.HTTP_201_CREATED,
        openapi_extra=UPLOAD_OPENAPI,
    )
    reader = [param("scope", ScopeDep), param("session", SessionDep), param("_", ReadKey)]
    router.add_api_route(
        path,
        endpoint(f"list_{name}", list_doc, [*reader, param("page", PageDep)], listing),
        methods=["GET"],
        response_model=Page[read],  # type: ignore[valid-type]
    )


@router.post("/burn-hours", response_model=BurnHourRead, status_code=status.HTTP_201_CREATED)
def create_burn_hours(
    body: BurnHourCreate, session: SessionDep, _: WriteKey, request: Request, response: Response
) -> BurnHourRead:
    """Record burn hours for a fixture or an area: a period total or a meter reading."""
    cols = columns_from_dicts([body.model_dump()], burn_hours.BURN_COLUMNS)
    burn_hours.ingest_burn_hours(session, cols)
    response.headers["Location"] = str(request.url_for("list_burn_hours"))  # no single-record route
    return BurnHourRead.model_validate(_latest(session, BurnHourRecord, body))


_reading_routes(
    ("/burn-hours", "burn_hours", BurnHourRecord, BurnHourRead),
    "Upload burn-hour rows as CSV or a JSON list (columns as in POST /burn-hours); all or none.",
    "List burn-hour records (sort: id, period_end).",
    (burn_hours.BURN_UPLOAD, burn_hours.ingest_burn_hours),
    BURN_SORT,
)


@router.post(
    "/voltage-readings", response_model=VoltageReadingRead, status_code=status.HTTP_201_CREATED
)
def create_voltage_reading(
    body: VoltageReadingCreate,
    session: SessionDep,
    _: WriteKey,
    request: Request,
    response: Response,
) -> VoltageReadingRead:
    """Record a supply voltage measured at a fixture or on an area's circuit."""
    cols = columns_from_dicts([body.model_dump()], voltage_upload.VOLTAGE_COLUMNS)
    voltage_upload.ingest_voltages(session, cols)
    response.headers["Location"] = str(request.url_for("list_voltage_readings"))
    return VoltageReadingRead.model_validate(_latest(session, VoltageReading, body))


_reading_routes(
    ("/voltage-readings", "voltage_readings", VoltageReading, VoltageReadingRead),
    "Upload voltage readings as CSV or a JSON list (fixture_id or area_id, measured_at, volts).",
    "List voltage readings (sort: id, measured_at).",
    (voltage_upload.VOLTAGE_UPLOAD, voltage_upload.ingest_voltages),
    VOLT_SORT,
)


@router.get("/position-ages", response_model=PositionAgesPage)
def list_position_ages(
    scope_at: ScopeAtDep, session: SessionDep, _: ReadKey, page: OffsetPageDep
) -> PositionAgesPage:
    """Each lamp position's age, starts and operating voltage (with its source), by id."""
    scope, at = scope_at
    site_id, area_id, fixture_id = scope.site_id, scope.area_id, scope.fixture_id
    if site_id is None and area_id is None and fixture_id is None:
        raise Invalid(
            "Give site_id, area_id or fixture_id.",
            errors=[{"field": "site_id", "in": "query", "message": "a scope is required"}],
        )
    if at is not None and at.tzinfo is None:
        at = at.replace(tzinfo=UTC)
    ages = position_ages(session, site_id=site_id, area_id=area_id, fixture_id=fixture_id, at=at)
    sl = slice(page.offset, page.offset + page.limit)
    items = [
        PositionAgeRead(
            **ages.row(i),
            site_id=int(ages.site_id[i]),
            lamp_installed_at=datetime.fromtimestamp(float(ages.installed_at_s[i]), UTC),
            starts=float(ages.starts[i]),
            burn_h_per_week=float(ages.burn_h_per_week[i]),
        )
        for i in range(ages.size)[sl]
    ]
    return PositionAgesPage(
        at=ages.at, items=items, total=ages.size, limit=page.limit, offset=page.offset
    )
