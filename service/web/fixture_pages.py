"""Fixture register pages: search, add, edit, CSV import and export, QR label sheets."""

from __future__ import annotations

from dataclasses import dataclass
from typing import Annotated, Any
from urllib.parse import quote, urlencode

import segno
from fastapi import APIRouter, File, Form, Query, Request, UploadFile
from fastapi.responses import HTMLResponse, Response
from pydantic import ValidationError
from sqlalchemy import select
from sqlalchemy.orm import Session
from sqlalchemy.orm.exc import StaleDataError

import service.register.fixture_bulk as fixture_bulk
import service.register.fixture_export as fixture_export
from service.api.auth import SessionDep
from service.api.bulk import export_response
from service.api.errors import DomainError
from service.api.pagination import PageParams, paginate
from service.register import fixtures
from service.register import repository as repo
from service.register.models import Area, Fixture, Site
from service.register.schemas import FixtureCreate, FixtureUpdate
from service.uploads.parse import RawBody, read_upload
from service.web import queries
from service.web.auth import VisitorDep, check_post
from service.web.pages import page, see_other

router = APIRouter(include_in_schema=False)
PAGE_SIZE = 50  # fixtures per register page
MAX_IMPORT_BYTES = 20 * 1024 * 1024  # a CSV upload from the page, bytes
Text = Annotated[str, Form(max_length=1000)]
BALLASTS = ("none", "reactor", "regulating", "electronic", "led_driver")
# The form's fields, in the order the register schemas name them.
FIELDS = (
    "tag",
    "location",
    "area_id",
    "lamp_type_id",
    "lamps_per_fixture",
    "ballast_kind",
    "measured_voltage_v",
    "installed_on",
)


@dataclass(frozen=True)
class Filters:
    """The register's search: site, area, lamp type, tag fragment and page number."""

    site_id: int | None
    area_id: int | None
    lamp_type_id: int | None
    tag: str
    page_no: int

    def query(self, **override: Any) -> str:
        """The query string of these filters (with some values replaced)."""
        values = {
            "site_id": self.site_id,
            "area_id": self.area_id,
            "lamp_type_id": self.lamp_type_id,
            "tag": self.tag,
            "page": self.page_no,
            **override,
        }
        return urlencode({k: v for k, v in values.items() if v not in (None, "")})


def _choices(session: Session) -> dict[str, Any]:
    """Sites, areas (with site names) and lamp types for the selects."""
    sites = queries.site_names(session)
    areas = session.scalars(select(Area).order_by(Area.site_id, Area.name)).all()
    return {
        "sites": sites,
        "areas": [(a.id, f"{sites.get(a.site_id, '')} / {a.name}", a.site_id) for a in areas],
        "lamp_types": [(t.id, t.code) for t in queries.lamp_types(session)],
        "ballasts": BALLASTS,
    }


def _int_or_none(raw: str | None) -> int | None:
    return int(raw) if raw and raw.isdigit() and 0 < int(raw) < 2**31 else None


@router.get("/app/fixtures", response_class=HTMLResponse)
def register_page(
    request: Request,
    session: SessionDep,
    visitor: VisitorDep,
    site_id: str = "",
    area_id: str = "",
    lamp_type_id: str = "",
    tag: Annotated[str, Query(max_length=64)] = "",
    page_no: Annotated[int, Query(alias="page", ge=1, le=100_000)] = 1,
) -> HTMLResponse:
    """The register, searched by site, area, lamp type and tag, one page at a time."""
    f = Filters(
        _int_or_none(site_id), _int_or_none(area_id), _int_or_none(lamp_type_id), tag[:64], page_no
    )
    stmt = repo.fixture_query(f.site_id, f.area_id, f.lamp_type_id, f.tag or None, False)
    params = PageParams(limit=PAGE_SIZE, offset=(f.page_no - 1) * PAGE_SIZE, sort="tag")
    rows, total = paginate(session, stmt, params, repo.FIXTURE_SORT, Fixture.id)
    pages = max(1, -(-total // PAGE_SIZE))
    return page(
        request,
        "fixtures.html",
        visitor=visitor,
        rows=rows,
        total=total,
        f=f,
        pages=pages,
        area_names={a[0]: a[1] for a in _choices(session)["areas"]},
        export_query=f.query(page=None),
        **_choices(session),
    )


def _form_values(fixture: Fixture | None) -> dict[str, Any]:
    if fixture is None:
        return {"lamps_per_fixture": 1}
    return {name: getattr(fixture, name) for name in FIELDS}


def _form_page(
    request: Request,
    session: Session,
    visitor: Any,
    fixture: Fixture | None,
    values: dict[str, Any],
    status_code: int = 200,
    error: str | None = None,
    field_errors: dict[str, str] | None = None,
    version: int | None = None,
) -> HTMLResponse:
    return page(
        request,
        "fixture_form.html",
        status_code,
        visitor=visitor,
        fixture=fixture,
        v=values,
        error=error,
        field_errors=field_errors or {},
        version=version if version is not None else (fixture.version if fixture else None),
        **_choices(session),
    )


@router.get("/app/fixtures/new", response_class=HTMLResponse)
def new_fixture_form(request: Request, session: SessionDep, visitor: VisitorDep) -> HTMLResponse:
    """The form for a new fixture."""
    return _form_page(request, session, visitor, None, _form_values(None))


@router.get("/app/fixtures/{fixture_id}/edit", response_class=HTMLResponse)
def edit_fixture_form(
    request: Request, session: SessionDep, visitor: VisitorDep, fixture_id: int
) -> HTMLResponse:
    """The form for changing a fixture (it carries the version it was read at)."""
    fixture = _fixture_or_none(session, fixture_id)
    if fixture is None:
        return _no_fixture(request, visitor, fixture_id)
    return _form_page(request, session, visitor, fixture, _form_values(fixture))


def _fixture_or_none(session: Session, fixture_id: int) -> Fixture | None:
    return session.get(Fixture, fixture_id) if 1 <= fixture_id < 2**31 else None


def _no_fixture(request: Request, visitor: Any, fixture_id: int) -> HTMLResponse:
    return page(
        request,
        "message.html",
        404,
        visitor=visitor,
        title="No such fixture",
        message=f"There is no fixture {fixture_id}.",
    )


def _sent(form: dict[str, str], creating: bool) -> dict[str, Any]:
    """The form's text fields as a body: blanks are left out (or None where clearable)."""
    body: dict[str, Any] = {}
    for name in FIELDS:
        raw = form.get(name, "").strip()
        if raw:
            body[name] = _typed(name, raw)
        elif name in ("location", "measured_voltage_v", "installed_on") and not creating:
            body[name] = None  # a cleared optional field clears the stored value
    return body


def _typed(name: str, raw: str) -> Any:
    """Numbers from the form's text (a bad one stays text, and the schema names the field)."""
    try:
        if name in ("area_id", "lamp_type_id", "lamps_per_fixture"):
            return int(raw)
        if name == "measured_voltage_v":
            return float(raw)
    except ValueError:
        pass
    return raw


def _validation_errors(exc: ValidationError) -> dict[str, str]:
    return {
        str(e["loc"][0]) if e["loc"] else "form": e["msg"].removeprefix("Value error, ")
        for e in exc.errors()
    }


def _domain_errors(exc: DomainError) -> dict[str, str]:
    return {str(e.get("field")): str(e.get("message", "")) for e in exc.errors or []}


async def _form_dict(request: Request) -> dict[str, str]:
    data = await request.form()
    return {k: v for k, v in data.items() if isinstance(v, str)}


@router.post("/app/fixtures/new", response_class=HTMLResponse)
async def create_fixture(request: Request, session: SessionDep, visitor: VisitorDep) -> Response:
    """Add a fixture through the register service (planner and up)."""
    form = await _form_dict(request)
    check_post(visitor, form.get("csrf_token", ""), "edit_register")
    values = _sent(form, creating=True)
    try:
        fixture = fixtures.create_fixture(session, FixtureCreate.model_validate(values))
    except ValidationError as exc:
        return _form_page(
            request, session, visitor, None, form, 422, "Some fields need fixing.",
            _validation_errors(exc),
        )  # fmt: skip
    except DomainError as exc:
        session.rollback()
        return _form_page(
            request, session, visitor, None, form, exc.status, exc.detail, _domain_errors(exc)
        )
    return see_other(
        f"/app/fixtures?{Filters(fixture.site_id, None, None, fixture.tag, 1).query()}"
    )


@router.post("/app/fixtures/{fixture_id}/edit", response_class=HTMLResponse)
async def update_fixture(
    request: Request, session: SessionDep, visitor: VisitorDep, fixture_id: int
) -> Response:
    """Change a fixture; a form read at an older version answers 409 with the current values."""
    form = await _form_dict(request)
    check_post(visitor, form.get("csrf_token", ""), "edit_register")
    fixture = _fixture_or_none(session, fixture_id)
    if fixture is None:
        return _no_fixture(request, visitor, fixture_id)
    read_at = _int_or_none(form.get("version"))
    if read_at != fixture.version:
        return _stale(request, session, visitor, fixture)
    try:
        body = FixtureUpdate.model_validate(_sent(form, creating=False))
        fixtures.update_fixture(session, fixture_id, body)
    except ValidationError as exc:
        return _form_page(
            request, session, visitor, fixture, form, 422, "Some fields need fixing.",
            _validation_errors(exc), version=read_at,
        )  # fmt: skip
    except StaleDataError:
        session.rollback()  # another request wrote the row between our read and write
        return _stale(request, session, visitor, session.get(Fixture, fixture_id))
    except DomainError as exc:
        session.rollback()
        return _form_page(
            request, session, visitor, session.get(Fixture, fixture_id), form, exc.status,
            exc.detail, _domain_errors(exc), version=read_at,
        )  # fmt: skip
    return see_other(
        f"/app/fixtures?{Filters(fixture.site_id, None, None, fixture.tag, 1).query()}"
    )


def _stale(request: Request, session: Session, visitor: Any, fixture: Fixture | None) -> Response:
    """409: someone changed the fixture since the form was read; show what it is now."""
    if fixture is None:
        return _no_fixture(request, visitor, 0)
    return _form_page(
        request,
        session,
        visitor,
        fixture,
        _form_values(fixture),
        409,
        "Someone changed this fixture after you opened the form. The form now shows the "
        "current values: make your change again and save.",
    )


@router.get("/app/fixtures/import", response_class=HTMLResponse)
def import_form(request: Request, visitor: VisitorDep) -> HTMLResponse:
    """The CSV import form."""
    return page(request, "fixture_import.html", visitor=visitor, columns=_columns(), result=None)


def _columns() -> list[tuple[str, bool]]:
    return [(c, c in fixture_bulk.FIXTURE_REQUIRED) for c in fixture_bulk.FIXTURE_COLUMNS]


@router.post("/app/fixtures/import", response_class=HTMLResponse)
def import_upload(
    request: Request,
    session: SessionDep,
    visitor: VisitorDep,
    file: Annotated[UploadFile, File()],
    csrf_token: Text = "",
    on_duplicate: Annotated[str, Form(pattern="^(error|update)$")] = "error",
) -> HTMLResponse:
    """Import a CSV through the upload pipeline: all rows or none; bad rows in a table."""
    check_post(visitor, csrf_token, "edit_register")
    data = file.file.read(MAX_IMPORT_BYTES + 1)
    cols = _columns()
    if len(data) > MAX_IMPORT_BYTES:
        return page(
            request, "fixture_import.html", 413, visitor=visitor, columns=cols, result=None,
            error=f"The file is over {MAX_IMPORT_BYTES // (1024 * 1024)} MB.", rows=[],
        )  # fmt: skip
    try:
        columns = read_upload(RawBody(data, "text/csv"), fixture_bulk.FIXTURE_UPLOAD)
        result = fixture_bulk.import_fixtures(session, columns, on_duplicate)
    except DomainError as exc:
        session.rollback()  # all rows or none: nothing of this file stays
        return page(
            request, "fixture_import.html", exc.status, visitor=visitor, columns=cols,
            result=None, error=exc.detail, rows=exc.errors or [],
        )  # fmt: skip
    return page(request, "fixture_import.html", visitor=visitor, columns=cols, result=result)


@router.get("/app/fixtures/export")
def export_download(
    session: SessionDep,
    visitor: VisitorDep,
    site_id: str = "",
    area_id: str = "",
    lamp_type_id: str = "",
    tag: str = "",
) -> Response:
    """Download the filtered register as CSV, in the columns the import takes back."""
    rows = fixture_export.export_fixtures(
        session,
        site_id=_int_or_none(site_id),
        area_id=_int_or_none(area_id),
        lamp_type_id=_int_or_none(lamp_type_id),
        tag_contains=tag[:64] or None,
    )
    return export_response(fixture_bulk.FIXTURE_COLUMNS, rows, "csv", "fixtures")


@dataclass(frozen=True)
class Label:
    """One printable label: the fixture's tag, where it is, and its report link as QR."""

    tag: str
    location: str | None
    url: str
    svg: str


def report_path(site_id: int, tag: str) -> str:
    """The short path that opens a fixture's burnout report page (tags may hold '/')."""
    return f"/f/{site_id}/{quote(tag, safe='/')}"


@router.get("/app/areas/{area_id}/labels", response_class=HTMLResponse)
def label_sheet(
    request: Request, session: SessionDep, visitor: VisitorDep, area_id: int
) -> HTMLResponse:
    """A printable sheet of QR labels for an area's fixtures."""
    area = session.get(Area, area_id) if 1 <= area_id < 2**31 else None
    if area is None:
        return page(
            request, "message.html", 404, visitor=visitor, title="No such area",
            message=f"There is no area {area_id}.",
        )  # fmt: skip
    site = session.get(Site, area.site_id)
    base = str(request.base_url).rstrip("/")
    stmt = select(Fixture).where(Fixture.area_id == area_id, Fixture.retired_at.is_(None))
    labels = []
    for fx in session.scalars(stmt.order_by(Fixture.tag)):
        url = base + report_path(fx.site_id, fx.tag)
        # Error correction M survives a scuffed label; scale 3 px per module on screen.
        qr = segno.make(url, error="m")
        labels.append(Label(fx.tag, fx.location, url, qr.svg_inline(scale=3, title=fx.tag)))
    return page(request, "labels.html", visitor=visitor, area=area, site=site, labels=labels)
