"""HTTP routes for work orders: list and poll, lifecycle, lines as JSON/CSV, print page."""

from __future__ import annotations

from typing import Annotated

from fastapi import APIRouter, Query, Response
from fastapi.responses import HTMLResponse

from service.api.auth import ReadKey, SessionDep, WriteKey
from service.api.bulk import CSV_RESPONSES
from service.api.errors import Invalid
from service.api.ids import IdPath, IdQuery
from service.api.lookups import ExternalReferenceQ
from service.api.pagination import Page, PageDep, paginate
from service.api.preconditions import versioned
from service.api.resource_routes import Resource
from service.api.times import Timestamp
from service.register.models import Area, Site
from service.workorders import exports, service
from service.workorders import repository as repo
from service.workorders.models import WorkOrder
from service.workorders.schemas import (
    CancelBody,
    CompleteBody,
    Kind,
    LineRead,
    State,
    WorkOrderCreate,
    WorkOrderRead,
    WorkOrderUpdate,
)

router = APIRouter(tags=["work orders"])
_COLUMNS = set(WorkOrder.__table__.columns.keys())


def read(order: WorkOrder, *, lines: bool = True) -> WorkOrderRead:
    """Shape an order for a response."""
    fields = {c: getattr(order, c) for c in WorkOrderRead.model_fields if c in _COLUMNS}
    body = WorkOrderRead.model_validate(
        {
            **fields,
            "allowed_next": list(service.TRANSITIONS[order.state]),
            "covers": order.covers,
        }
    )
    if lines:
        body.lines = [LineRead.model_validate(ln) for ln in order.lines]
    return body


ORDER = Resource(
    collection="/work-orders",
    id_name="order_id",
    model=WorkOrder,
    read=WorkOrderRead,
    shape=read,
    service=service,
)


@router.get("/work-orders", response_model=Page[WorkOrderRead])
def list_orders(
    session: SessionDep,
    _: ReadKey,
    page: PageDep,
    site_id: IdQuery = None,
    area_id: IdQuery = None,
    state: State | None = None,
    kind: Kind | None = None,
    iso_week: Annotated[str | None, Query(pattern=r"^\d{4}-W\d{2}$")] = None,
    changed_since: Annotated[
        Timestamp | None,
        Query(description="ISO 8601 with offset: orders created or changed at or after it."),
    ] = None,
    include_lines: bool = False,
    external_reference: ExternalReferenceQ = None,
) -> Page[WorkOrderRead]:
    """List orders (sort: id, due_on, updated_at, created_at, state); poll with changed_since."""
    if changed_since is not None and changed_since.tzinfo is None:
        raise Invalid(
            "changed_since needs a UTC offset, e.g. 2026-12-01T06:00:00Z.",
            errors=[{"field": "changed_since", "in": "query", "message": "no offset"}],
        )
    stmt = repo.order_query(
        site_id=site_id,
        area_id=area_id,
        state=state,
        kind=kind,
        iso_week=iso_week,
        changed_since=changed_since,
        external_reference=external_reference,
    )
    default = WorkOrder.updated_at if changed_since is not None else WorkOrder.id
    rows, total = paginate(session, stmt, page, repo.ORDER_SORT, default)
    return Page(
        items=[read(r, lines=include_lines) for r in rows],
        total=total,
        limit=page.limit,
        offset=page.offset,
        next_after=page.next_after,
    )


ORDER.create_route(
    router,
    ("create_order", "get_order"),
    "Create a draft order by hand for one area (group: all fixtures; spot: open burnouts).",
    WorkOrderCreate,
    service.create,
)
ORDER.get_route(router, "get_order", "One order with its lines.")
ORDER.patch_route(
    router,
    "update_order",
    "Set the external reference (from a CMMS), notes or due date.",
    WorkOrderUpdate,
    service.update,
)
ORDER.action_route(
    router,
    "issue",
    "issue_order",
    "draft -> issued (409 from any other state).",
    service.issue,
)
ORDER.action_route(
    router,
    "start",
    "start_order",
    "issued -> in_progress (409 from any other state).",
    service.start,
)
ORDER.action_route(
    router,
    "complete",
    "complete_order",
    "in_progress -> done with per-fixture outcomes; replaced lamps are recorded as removals.",
    service.complete,
    CompleteBody,
)


@router.post(
    "/work-orders/{order_id}/cancel",
    response_model=WorkOrderRead,
    dependencies=[versioned(WorkOrder, "order_id")],
)
def cancel_order(
    order_id: IdPath, session: SessionDep, _: WriteKey, body: CancelBody | None = None
) -> WorkOrderRead:
    """Cancel an open order; positions stay as they were, batched reports reopen."""
    return read(service.cancel(session, order_id, body or CancelBody()))


@router.get("/work-orders/{order_id}/lines", response_model=list[LineRead])
def order_lines(order_id: IdPath, session: SessionDep, _: ReadKey) -> list[LineRead]:
    """An order's lines as JSON (one per fixture)."""
    return [LineRead.model_validate(ln) for ln in service.lines_of(session, order_id)]


@router.get("/work-orders/{order_id}/lines.csv", response_class=Response, responses=CSV_RESPONSES)
def order_lines_csv(order_id: IdPath, session: SessionDep, _: ReadKey) -> Response:
    """An order's lines as CSV (UTF-8, one row per fixture)."""
    order = service.get_order(session, order_id)
    text = exports.lines_csv(order, service.lines_of(session, order_id))
    return Response(
        text,
        media_type="text/csv; charset=utf-8",
        headers={"Content-Disposition": f'attachment; filename="work-order-{order_id}.csv"'},
    )


@router.get("/work-orders/{order_id}/print", response_class=HTMLResponse)
def order_print(order_id: IdPath, session: SessionDep, _: ReadKey) -> HTMLResponse:
    """A printable page: cautions at the top, fixtures by location, a checkbox per position."""
    order = service.get_order(session, order_id)
    site = session.get(Site, order.site_id)
    area = session.get(Area, order.area_id)
    html = exports.print_page(
        order,
        service.lines_of(session, order_id),
        site.name if site else "",
        area.name if area else "",
    )
    return HTMLResponse(html)
