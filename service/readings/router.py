"""HTTP routes for burn-hour records, voltage readings and position ages."""

from __future__ import annotations

import math
from dataclasses import dataclass
from datetime import UTC, datetime
from typing import Annotated, Any

from fastapi import APIRouter, Depends, Query, Request, Response, status
from sqlalchemy import select
from sqlalchemy.orm import Session

from service.api.auth import ReadKey, SessionDep, WriteKey
from service.api.bulk import UPLOAD_OPENAPI, RawBodyDep
from service.api.errors import Invalid
from service.api.ids import IdQuery
from service.api.pagination import OffsetPageDep, Page, PageDep, page_of, paginate
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


@router.post("/burn-hours", response_model=BurnHourRead, status_code=status.HTTP_201_CREATED)
def create_burn_hours(
    body: BurnHourCreate, session: SessionDep, _: WriteKey, request: Request, response: Response
) -> BurnHourRead:
    """Record burn hours for a fixture or an area: a period total or a meter reading."""
    cols = columns_from_dicts([body.model_dump()], burn_hours.BURN_COLUMNS)
    burn_hours.ingest_burn_hours(session, cols)
    response.headers["Location"] = str(request.url_for("list_burn_hours"))  # no single-record route
    return BurnHourRead.model_validate(_latest(session, BurnHourRecord, body))


@router.post(
    "/burn-hours/bulk",
    response_model=BulkResult,
    status_code=status.HTTP_201_CREATED,
    openapi_extra=UPLOAD_OPENAPI,
)
def upload_burn_hours(
    body: RawBodyDep, session: SessionDep, _: WriteKey, request: Request, response: Response
) -> BulkResult:
    """Upload burn-hour rows as CSV or a JSON list (columns as in POST /burn-hours); all or none."""
    cols = read_upload(body, burn_hours.BURN_UPLOAD)
    response.headers["Location"] = str(request.url_for("list_burn_hours"))
    return BulkResult(stored=burn_hours.ingest_burn_hours(session, cols))


@router.get("/burn-hours", response_model=Page[BurnHourRead])
def list_burn_hours(
    scope: ScopeDep, session: SessionDep, _: ReadKey, page: PageDep
) -> Page[BurnHourRead]:
    """List burn-hour records (sort: id, period_end)."""
    stmt = _filters(BurnHourRecord, scope)
    rows, total = paginate(session, stmt, page, BURN_SORT, BurnHourRecord.id)
    return page_of(BurnHourRead, rows, total, page)


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


@router.post(
    "/voltage-readings/bulk",
    response_model=BulkResult,
    status_code=status.HTTP_201_CREATED,
    openapi_extra=UPLOAD_OPENAPI,
)
def upload_voltage_readings(
    body: RawBodyDep, session: SessionDep, _: WriteKey, request: Request, response: Response
) -> BulkResult:
    """Upload voltage readings as CSV or a JSON list (fixture_id or area_id, measured_at, volts)."""
    cols = read_upload(body, voltage_upload.VOLTAGE_UPLOAD)
    response.headers["Location"] = str(request.url_for("list_voltage_readings"))
    return BulkResult(stored=voltage_upload.ingest_voltages(session, cols))


@router.get("/voltage-readings", response_model=Page[VoltageReadingRead])
def list_voltage_readings(
    scope: ScopeDep, session: SessionDep, _: ReadKey, page: PageDep
) -> Page[VoltageReadingRead]:
    """List voltage readings (sort: id, measured_at)."""
    stmt = _filters(VoltageReading, scope)
    rows, total = paginate(session, stmt, page, VOLT_SORT, VoltageReading.id)
    return page_of(VoltageReadingRead, rows, total, page)


@router.get("/position-ages", response_model=PositionAgesPage)
def list_position_ages(
    session: SessionDep,
    _: ReadKey,
    page: OffsetPageDep,
    site_id: IdQuery = None,
    area_id: IdQuery = None,
    fixture_id: IdQuery = None,
    at: Annotated[Timestamp | None, Query(description="Moment (default now).")] = None,
) -> PositionAgesPage:
    """Each lamp position's age, starts and operating voltage (with its source), by id."""
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
            position_id=int(ages.position_id[i]),
            fixture_id=int(ages.fixture_id[i]),
            area_id=int(ages.area_id[i]),
            site_id=int(ages.site_id[i]),
            lamp_type_id=int(ages.lamp_type_id[i]),
            lamp_installed_at=datetime.fromtimestamp(float(ages.installed_at_s[i]), UTC),
            age_h=float(ages.age_h[i]),
            starts=float(ages.starts[i]),
            hours_per_start=None
            if math.isnan(ages.hours_per_start[i])
            else float(ages.hours_per_start[i]),
            voltage_v=float(ages.voltage_v[i]),
            voltage_source=str(ages.voltage_source[i]),
            burned_out=bool(ages.burned_out[i]),
            burn_h_per_week=float(ages.burn_h_per_week[i]),
        )
        for i in range(ages.size)[sl]
    ]
    return PositionAgesPage(
        at=ages.at, items=items, total=ages.size, limit=page.limit, offset=page.offset
    )
