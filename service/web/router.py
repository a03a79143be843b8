"""Page routes: sign-in and out, overview, burnout report, work orders (HTTP only)."""

from __future__ import annotations

from collections.abc import Callable
from typing import Annotated, TypeVar

from fastapi import APIRouter, Form, Request
from fastapi.responses import HTMLResponse, Response
from pydantic import ValidationError
from sqlalchemy.orm import Session

from service.api.auth import SessionDep
from service.api.errors import DomainError
from service.db.base import utcnow
from service.planning import service as planning
from service.planning.choice import has_alternatives
from service.planning.choice_bodies import lamp_choice_read
from service.planning.plan_bodies import area_plan_read
from service.planning.service import WEEKS_PER_YEAR
from service.register.models import Site
from service.users import service as users
from service.web import charts, queries
from service.web import overview as overview_page
from service.web.auth import (
    COOKIE,
    Visitor,
    VisitorDep,
    check_post,
    client_ip,
    set_cookie_secure,
)
from service.web.pages import page, see_other
from service.workorders import exports
from service.workorders import service as orders_service
from service.workorders.repository import last_group_relamps
from service.workorders.schemas import (
    CancelBody,
    CompleteBody,
    FixtureOutcome,
    PositionOutcome,
)

router = APIRouter(include_in_schema=False)
Text = Annotated[str, Form(max_length=1000)]


@router.get("/sign-in", response_class=HTMLResponse)
def sign_in_form(request: Request, next: str = "/app") -> HTMLResponse:
    """The sign-in form."""
    return page(request, "sign_in.html", next=_safe_next(next), error=None)


def _safe_next(target: str) -> str:
    # Only our own pages: no scheme, no other host, no protocol-relative URL.
    return target if target.startswith("/") and not target.startswith("//") else "/app"


@router.post("/sign-in", response_class=HTMLResponse)
def sign_in(
    request: Request,
    session: SessionDep,
    username: Text,
    password: Text,
    next: Annotated[str, Form(max_length=300)] = "/app",
) -> Response:
    """Check the password; on success set the session cookie and go on."""
    try:
        signed = users.sign_in(session, username, password, client_ip(request))
    except users.SignInRefused as exc:
        # The failure row must stay although the page answers an error: commit it here.
        session.commit()
        code = 429 if exc.locked else 401
        return page(request, "sign_in.html", code, next=_safe_next(next), error=str(exc))
    resp = see_other(_safe_next(next))
    resp.set_cookie(
        COOKIE,
        signed.token,
        max_age=int(users.SESSION_LIFETIME.total_seconds()),
        httponly=True,
        samesite="lax",
        secure=set_cookie_secure(request),
        path="/",
    )
    return resp


@router.post("/sign-out")
def sign_out(
    request: Request, session: SessionDep, visitor: VisitorDep, csrf_token: Text = ""
) -> Response:
    """End the session and clear the cookie."""
    check_post(visitor, csrf_token)
    users.sign_out(session, request.cookies.get(COOKIE, ""))
    resp = see_other("/sign-in")
    resp.delete_cookie(COOKIE, path="/")
    return resp


@router.get("/app", response_class=HTMLResponse)
def overview(request: Request, session: SessionDep, visitor: VisitorDep) -> HTMLResponse:
    """Each site's open burnouts, orders and relamps due, areas due soon, the weekly chart."""
    view = overview_page.overview(session, utcnow())
    return page(request, "overview.html", visitor=visitor, view=view)


@router.get("/app/lamp-types", response_class=HTMLResponse)
def lamp_types_page(request: Request, session: SessionDep, visitor: VisitorDep) -> HTMLResponse:
    """The lamp catalogue with the life curve forecasts use for each type."""
    rows = queries.lamp_types(session)
    curves = charts.curves_in_use(session, [r.id for r in rows])
    return page(request, "lamp_types.html", visitor=visitor, rows=rows, curves=curves)


@router.get("/app/lamp-types/{lamp_type_id}", response_class=HTMLResponse)
def lamp_type_page(
    request: Request, session: SessionDep, visitor: VisitorDep, lamp_type_id: int
) -> HTMLResponse:
    """One lamp type: its field fit (Kaplan-Meier, fitted and catalogue Weibull) and choice."""
    view = charts.field_fit_view(session, lamp_type_id)
    return page(request, "lamp_type.html", visitor=visitor, view=view)


@router.get("/app/sites/{site_id}", response_class=HTMLResponse)
def site_page(
    request: Request, session: SessionDep, visitor: VisitorDep, site_id: int
) -> HTMLResponse:
    """A site's areas with their plans in one line each, soonest due first."""
    site = session.get(Site, site_id)
    if site is None:
        return page(
            request,
            "message.html",
            404,
            visitor=visitor,
            title="No such site",
            message=f"There is no site {site_id}.",
        )
    plans = [
        area_plan_read(p)
        for p in planning.site_plans(session, site, last_relamps=last_group_relamps)
    ]
    return page(request, "site.html", visitor=visitor, site=site, plans=plans)


@router.get("/app/areas/{area_id}", response_class=HTMLResponse)
def area_page(
    request: Request, session: SessionDep, visitor: VisitorDep, area_id: int
) -> HTMLResponse:
    """An area's plan in words, its survival, light and cost charts, and its open burnouts."""
    plan = planning.area_plan(session, area_id, last_relamps=last_group_relamps)
    read = area_plan_read(plan)
    return page(
        request,
        "area.html",
        visitor=visitor,
        plan=read,
        area=plan.area,
        site=plan.site,
        groups=list(zip(read.lamp_types, charts.area_charts(session, plan), strict=True)),
        weeks_per_year=WEEKS_PER_YEAR,
        reports=queries.open_reports_in_area(session, area_id),
        fixtures=queries.fixture_risks(session, area_id),
        risk_weeks=queries.RISK_WEEKS,
        choice=lamp_choice_read(session, plan) if has_alternatives(session, plan) else None,
    )


@router.get("/app/report", response_class=HTMLResponse)
def report_find(
    request: Request,
    session: SessionDep,
    visitor: VisitorDep,
    site_id: int | None = None,
    tag: str = "",
) -> Response:
    """Find a fixture by site and tag for a burnout report."""
    if site_id is not None and tag:
        return see_other(f"/f/{site_id}/{_quote(tag)}")
    return page(
        request,
        "report_find.html",
        visitor=visitor,
        sites=queries.sites(session),
        tag=tag,
        error=None,
    )


def _quote(tag: str) -> str:
    from urllib.parse import quote

    return quote(tag, safe="")


@router.get("/f/{site_id}/{tag:path}", response_class=HTMLResponse)
def report_form(
    request: Request, session: SessionDep, visitor: VisitorDep, site_id: int, tag: str
) -> HTMLResponse:
    """The phone page for one fixture: pick the dark position and send."""
    fixture = queries.fixture_by_tag(session, site_id, tag)
    if fixture is None:
        return page(
            request,
            "report_find.html",
            404,
            visitor=visitor,
            sites=queries.sites(session),
            tag=tag,
            error=f"No fixture tagged {tag!r} at that site.",
        )
    return page(
        request,
        "report_form.html",
        visitor=visitor,
        fixture=fixture,
        area=queries.area_name(session, fixture.area_id),
        positions=queries.positions_of(session, fixture.id),
        error=None,
    )


@router.post("/app/report", response_class=HTMLResponse)
def report_send(
    request: Request,
    session: SessionDep,
    visitor: VisitorDep,
    position_id: Annotated[int, Form(ge=1, le=2**31 - 1)],
    csrf_token: Text = "",
    note: Annotated[str, Form(max_length=500)] = "",
    replaced: Annotated[bool, Form()] = False,
) -> Response:
    """Record the burnout through the events service, then confirm."""
    check_post(visitor, csrf_token, "report_burnout")
    from service.events import burnouts

    try:
        report = burnouts.report_burnout(
            session,
            position_id=position_id,
            reported_at=utcnow(),
            note=note.strip() or None,
            replaced=replaced,
        )
    except DomainError as exc:
        return page(
            request,
            "message.html",
            exc.status,
            visitor=visitor,
            title="Not recorded",
            message=exc.detail,
        )
    return page(request, "report_done.html", visitor=visitor, report=report)


@router.get("/app/work-orders", response_class=HTMLResponse)
def order_list(
    request: Request,
    session: SessionDep,
    visitor: VisitorDep,
    site_id: int | None = None,
    state: str = "",
) -> HTMLResponse:
    """Work orders, filtered by site and state."""
    found = queries.orders(session, site_id, state or None)
    return page(
        request,
        "orders.html",
        visitor=visitor,
        orders=found,
        sites=queries.site_names(session),
        site_id=site_id,
        state=state,
        states=list(orders_service.TRANSITIONS),
    )


@router.get("/app/work-orders/{order_id}", response_class=HTMLResponse)
def order_detail(
    request: Request, session: SessionDep, visitor: VisitorDep, order_id: int
) -> HTMLResponse:
    """One order, its lines and the state buttons the role and state allow."""
    return _order_page(request, session, visitor, order_id)


def _order_page(
    request: Request,
    session: Session,
    visitor: Visitor,
    order_id: int,
    status_code: int = 200,
    error: str | None = None,
    errors: list[str] | None = None,
) -> HTMLResponse:
    order = orders_service.get_order(session, order_id)
    allowed = orders_service.TRANSITIONS[order.state]
    buttons = [b for b in _BUTTONS if b[0] in allowed and visitor.can(b[2])]
    return page(
        request,
        "order.html",
        status_code,
        visitor=visitor,
        order=order,
        buttons=buttons,
        can_complete="done" in allowed and visitor.can("complete_order"),
        can_cancel="cancelled" in allowed and visitor.can("cancel_order"),
        lines=orders_service.lines_of(session, order_id),
        site=queries.site_names(session).get(order.site_id, ""),
        area=queries.area_name(session, order.area_id),
        error=error,
        errors=errors or [],
    )


# (next state, button label, page action the role needs); completing and cancelling
# have their own forms (outcomes per fixture, a reason) below.
# A draft (the weekly run of a site set to drafts, or made by hand) waits for a planner's
# approval: issuing it reserves its stocked lamps.
_BUTTONS = [
    ("issued", "Approve and issue", "issue_order"),
    ("in_progress", "Start work", "work_order"),
]
Ids = Annotated[list[int], Form(max_length=100_000)]
Texts = Annotated[list[str], Form(max_length=100_000)]


@router.post("/app/work-orders/{order_id}/complete", response_class=HTMLResponse)
def order_complete(
    request: Request,
    session: SessionDep,
    visitor: VisitorDep,
    order_id: int,
    csrf_token: Text = "",
    fixture_id: Ids = [],  # noqa: B006 (FastAPI copies form defaults)
    outcome: Texts = [],  # noqa: B006
    reason: Texts = [],  # noqa: B006
    position_id: Ids = [],  # noqa: B006
    position_outcome: Texts = [],  # noqa: B006
    position_reason: Texts = [],  # noqa: B006
) -> Response:
    """Complete a started order: an outcome per position (or per fixture), skips with reasons."""
    check_post(visitor, csrf_token, "complete_order")
    if not (len(fixture_id) == len(outcome) == len(reason)) or not (
        len(position_id) == len(position_outcome) == len(position_reason)
    ):
        return _order_page(request, session, visitor, order_id, 422, "The form is incomplete.")
    outcomes, errors = _rows_from_form(
        fixture_id,
        outcome,
        reason,
        lambda f, o, r: FixtureOutcome(fixture_id=f, outcome=o, reason=r),
        lambda n, f: f"Row {n} (fixture {f})",
    )
    positions, position_errors = _rows_from_form(
        position_id,
        position_outcome,
        position_reason,
        lambda p, o, r: PositionOutcome(position_id=p, outcome=o, reason=r),
        lambda n, p: f"Position row {n} (position {p})",
    )
    errors += position_errors
    if errors:
        return _order_page(
            request, session, visitor, order_id, 422, "Some outcomes need fixing.", errors
        )
    body = CompleteBody(outcomes=outcomes, positions=positions)
    try:
        orders_service.complete(session, order_id, body)
    except DomainError as exc:
        session.rollback()  # nothing half-written stays
        return _order_page(
            request, session, visitor, order_id, exc.status, exc.detail, _error_lines(exc)
        )
    return see_other(f"/app/work-orders/{order_id}")


R = TypeVar("R")


def _rows_from_form(
    ids: list[int],
    outcomes: list[str],
    reasons: list[str],
    build: Callable[[int, str, str | None], R],
    label: Callable[[int, int], str],
) -> tuple[list[R], list[str]]:
    """The form's rows built, and a readable error (led by label) naming each row refused."""
    rows: list[R] = []
    errors: list[str] = []
    for i, (x, o, r) in enumerate(zip(ids, outcomes, reasons, strict=True)):
        try:
            rows.append(build(x, o, r.strip() or None))
        except ValidationError as exc:
            why = "; ".join(e["msg"].removeprefix("Value error, ") for e in exc.errors())
            errors.append(f"{label(i + 1, x)}: {why}")
    return rows, errors


def _error_lines(exc: DomainError) -> list[str]:
    """The field messages a domain error carries, for the page."""
    return [str(e.get("message", "")) for e in exc.errors or []]


@router.post("/app/work-orders/{order_id}/cancel", response_class=HTMLResponse)
def order_cancel(
    request: Request,
    session: SessionDep,
    visitor: VisitorDep,
    order_id: int,
    csrf_token: Text = "",
    reason: Annotated[str, Form(max_length=500)] = "",
) -> Response:
    """Cancel an open order with a reason (planner and up)."""
    check_post(visitor, csrf_token, "cancel_order")
    if not reason.strip():
        return _order_page(
            request, session, visitor, order_id, 422, "Say why the order is cancelled."
        )
    try:
        orders_service.cancel(session, order_id, CancelBody(reason=reason.strip()))
    except DomainError as exc:
        session.rollback()
        return _order_page(request, session, visitor, order_id, exc.status, exc.detail)
    return see_other(f"/app/work-orders/{order_id}")


@router.post("/app/work-orders/{order_id}/{to}", response_class=HTMLResponse)
def order_move(
    request: Request,
    session: SessionDep,
    visitor: VisitorDep,
    order_id: int,
    to: str,
    csrf_token: Text = "",
) -> Response:
    """Move an order on (issue or start), if the role allows it."""
    action = {b[0]: b[2] for b in _BUTTONS}.get(to)
    if action is None:
        return page(
            request,
            "message.html",
            404,
            visitor=visitor,
            title="Unknown action",
            message="That state change is not offered here.",
        )
    check_post(visitor, csrf_token, action)
    try:
        (orders_service.issue if to == "issued" else orders_service.start)(session, order_id)
    except DomainError as exc:
        return page(
            request,
            "message.html",
            exc.status,
            visitor=visitor,
            title="Not changed",
            message=exc.detail,
        )
    return see_other(f"/app/work-orders/{order_id}")


@router.get("/app/work-orders/{order_id}/print", response_class=HTMLResponse)
def order_print(session: SessionDep, visitor: VisitorDep, order_id: int) -> HTMLResponse:
    """The printable order for a signed-in browser (the API route wants a Bearer key)."""
    order = orders_service.get_order(session, order_id)
    site = session.get(Site, order.site_id)
    html = exports.print_page(
        order,
        orders_service.lines_of(session, order_id),
        site.name if site else "",
        queries.area_name(session, order.area_id),
    )
    return HTMLResponse(html)
