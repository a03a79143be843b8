"""HTTP routes for storerooms: stock lines, the ledger, demand, the to-order list, budgets."""

from __future__ import annotations

from typing import Annotated, Literal

from fastapi import APIRouter, Depends, Query, Request, Response, status

from service.api.auth import ReadKey, SessionDep, WriteKey
from service.api.bulk import export_response
from service.api.ids import IdPath, IdQuery
from service.api.pagination import Page, PageDep, page_of, paginate
from service.api.preconditions import locate
from service.planning.service import LastRelamps
from service.register.sites import get_site
from service.stock import budget, forecast, ledger, service
from service.stock import present as show
from service.stock import repository as repo
from service.stock.models import StockBalance, StockMovement
from service.stock.schemas import (
    BalanceRead,
    BalanceSettings,
    BudgetRead,
    BudgetRequest,
    BudgetRow,
    DemandRead,
    ManualKind,
    MovementCreate,
    MovementRead,
    OutlookRead,
    StoreroomCreate,
    StoreroomRead,
    ToOrderLine,
)

WeeksQ = Annotated[int | None, Query(ge=1, le=104, description="Horizon in weeks.")]
LevelQ = Annotated[
    float | None, Query(ge=0.5, le=0.999, description="Cycle service level, e.g. 0.95.")
]
FormatQ = Annotated[Literal["json", "csv"], Query(description="Download as JSON or CSV.")]


def forecast_options(weeks: WeeksQ = None, service_level: LevelQ = None) -> forecast.Options:
    """The horizon and service level from the query; the settings fill what is not given."""
    return forecast.Options.of(weeks, service_level)


OptionsDep = Annotated[forecast.Options, Depends(forecast_options)]


def balance_read(b: StockBalance) -> BalanceRead:
    """A stock line shaped for a response."""
    return BalanceRead.model_validate(b)


def budget_answer(rows: list[budget.Row], body: BudgetRequest, name: str) -> Response:
    """A budget as JSON (with monthly totals when a reporting currency is set) or CSV."""
    dicts = budget.convert(rows, body.reporting_currency, dict(body.rates))
    if body.format == "csv":
        return export_response(list(BudgetRow.model_fields), dicts, "csv", name)
    totals = budget.totals(dicts, "reporting_amount") if body.reporting_currency else None
    read = BudgetRead(
        months=budget.MONTHS,
        rows=[BudgetRow.model_validate(d) for d in dicts],
        totals_by_month=totals,
    )
    return Response(read.model_dump_json(), media_type="application/json")


def _storeroom_routes(router: APIRouter) -> None:
    """Storerooms and the sites they serve."""

    @router.get("/storerooms", response_model=Page[StoreroomRead])
    def list_storerooms(session: SessionDep, _: ReadKey, page: PageDep) -> Page[StoreroomRead]:
        """Every storeroom with the sites it serves."""
        rooms = service.list_storerooms(session)
        window = rooms[page.offset : page.offset + page.limit]
        return Page[StoreroomRead](
            items=[service.read(session, r) for r in window],
            total=len(rooms),
            limit=page.limit,
            offset=page.offset,
        )

    @router.post("/storerooms", response_model=StoreroomRead, status_code=status.HTTP_201_CREATED)
    def create_storeroom(
        body: StoreroomCreate,
        session: SessionDep,
        _: WriteKey,
        request: Request,
        response: Response,
    ) -> StoreroomRead:
        """A storeroom; the sites listed are served from it (shared by several sites)."""
        room = service.create_storeroom(session, body)
        locate(request, response, "get_storeroom", storeroom_id=room.id)
        return service.read(session, room)

    @router.get("/storerooms/{storeroom_id}", response_model=StoreroomRead)
    def get_storeroom(storeroom_id: IdPath, session: SessionDep, _: ReadKey) -> StoreroomRead:
        """One storeroom with the sites it serves."""
        return service.read(session, service.get_storeroom(session, storeroom_id))

    @router.put("/storerooms/{storeroom_id}/sites/{site_id}", response_model=StoreroomRead)
    def assign_site(
        storeroom_id: IdPath, site_id: IdPath, session: SessionDep, _: WriteKey
    ) -> StoreroomRead:
        """Serve a site from this storeroom (from now on; reserved lamps stay where held)."""
        service.assign_site(session, storeroom_id, site_id)
        return service.read(session, service.get_storeroom(session, storeroom_id))


def _stock_routes(router: APIRouter) -> None:
    """Stock lines: one per lamp type stocked in a storeroom."""

    @router.get("/storerooms/{storeroom_id}/stock", response_model=list[BalanceRead])
    def list_stock(storeroom_id: IdPath, session: SessionDep, _: ReadKey) -> list[BalanceRead]:
        """Every lamp type stocked here: on hand, reserved, available and reorder settings."""
        return [balance_read(b) for b in service.balances(session, storeroom_id)]

    @router.get("/storerooms/{storeroom_id}/stock/{lamp_type_id}", response_model=BalanceRead)
    def get_stock(
        storeroom_id: IdPath, lamp_type_id: IdPath, session: SessionDep, _: ReadKey
    ) -> BalanceRead:
        """One lamp type's stock line."""
        service.get_storeroom(session, storeroom_id)
        return balance_read(ledger.get_balance(session, storeroom_id, lamp_type_id))

    @router.put("/storerooms/{storeroom_id}/stock/{lamp_type_id}", response_model=BalanceRead)
    def put_stock(
        storeroom_id: IdPath,
        lamp_type_id: IdPath,
        body: BalanceSettings,
        session: SessionDep,
        _: WriteKey,
        response: Response,
    ) -> BalanceRead:
        """Stock a lamp type here (at zero) or change its lead time, pack size and costs."""
        bal, created = service.put_balance(session, storeroom_id, lamp_type_id, body)
        if created:
            response.status_code = status.HTTP_201_CREATED
        return balance_read(bal)


def _movement_routes(router: APIRouter) -> None:
    """The storeroom's ledger: list and record movements."""

    @router.get("/storerooms/{storeroom_id}/movements", response_model=Page[MovementRead])
    def list_movements(
        storeroom_id: IdPath,
        session: SessionDep,
        _: ReadKey,
        page: PageDep,
        lamp_type_id: IdQuery = None,
        work_order_id: IdQuery = None,
        kind: ManualKind | None = None,
    ) -> Page[MovementRead]:
        """The storeroom's ledger, oldest first (sort: id, at, kind)."""
        service.get_storeroom(session, storeroom_id)
        stmt = repo.movement_query(storeroom_id, lamp_type_id, kind, work_order_id)
        rows, total = paginate(session, stmt, page, repo.MOVEMENT_SORT, StockMovement.id)
        return page_of(MovementRead, rows, total, page)

    @router.post(
        "/storerooms/{storeroom_id}/movements",
        response_model=MovementRead,
        status_code=status.HTTP_201_CREATED,
    )
    def record_movement(
        storeroom_id: IdPath, body: MovementCreate, session: SessionDep, _: WriteKey
    ) -> MovementRead:
        """Record a delivery, a return, lamps taken out or a count (409 below zero)."""
        return MovementRead.model_validate(service.record(session, storeroom_id, body))


def _demand_routes(router: APIRouter, last_relamps: LastRelamps) -> None:
    """Demand, the to-order list and the outlook (they need the last group relamps)."""

    @router.get("/storerooms/{storeroom_id}/demand", response_model=DemandRead)
    def get_demand(
        storeroom_id: IdPath,
        session: SessionDep,
        _: ReadKey,
        opt: OptionsDep,
    ) -> DemandRead:
        """Lamps needed per week and lamp type: spot (mean, quantile), group, breakage."""
        sd = forecast.storeroom_demand(
            session, storeroom_id, last_relamps=last_relamps, options=opt
        )
        return show.demand_read(session, sd)

    @router.get("/storerooms/{storeroom_id}/to-order", response_model=list[ToOrderLine])
    def get_to_order(
        storeroom_id: IdPath,
        session: SessionDep,
        _: ReadKey,
        opt: OptionsDep,
    ) -> list[ToOrderLine]:
        """Every stocked lamp type with its reorder point and the quantity to order now."""
        return show.to_order_lines(session, storeroom_id, last_relamps, opt)

    @router.get("/storerooms/{storeroom_id}/to-order/download", response_class=Response)
    def download_to_order(
        storeroom_id: IdPath,
        session: SessionDep,
        _: ReadKey,
        opt: OptionsDep,
        format: FormatQ = "csv",
    ) -> Response:
        """The to-order list as a CSV or JSON file (lines with a quantity to order only)."""
        lines = show.to_order_lines(session, storeroom_id, last_relamps, opt)
        rows = [ln.model_dump() for ln in lines if ln.order_quantity > 0]
        cols = list(ToOrderLine.model_fields)
        return export_response(cols, rows, format, f"to-order-storeroom-{storeroom_id}")

    @router.get(
        "/storerooms/{storeroom_id}/stock/{lamp_type_id}/outlook", response_model=OutlookRead
    )
    def get_outlook(
        storeroom_id: IdPath,
        lamp_type_id: IdPath,
        session: SessionDep,
        _: ReadKey,
        opt: OptionsDep,
    ) -> OutlookRead:
        """The available stock week by week, with the suggested order arriving after lead."""
        return show.outlook_read(session, storeroom_id, lamp_type_id, last_relamps, opt)


def _budget_routes(router: APIRouter, last_relamps: LastRelamps) -> None:
    """A site's and the portfolio's 12-month budgets."""

    @router.post(
        "/sites/{site_id}/budget",
        response_model=BudgetRead,
        responses={200: {"content": {"text/csv": {}}}},
    )
    def site_budget(
        site_id: IdPath, body: BudgetRequest, session: SessionDep, _: ReadKey
    ) -> Response:
        """A site's 12-month budget by month, split and category (JSON or CSV; stores nothing)."""
        site = get_site(session, site_id)
        rows = budget.site_budget(
            session,
            site,
            last_relamps=last_relamps,
            cleaning_minutes_per_lamp=body.cleaning_minutes_per_lamp,
        )
        return budget_answer(rows, body, f"budget-site-{site_id}")

    @router.post(
        "/budget", response_model=BudgetRead, responses={200: {"content": {"text/csv": {}}}}
    )
    def portfolio_budget(body: BudgetRequest, session: SessionDep, _: ReadKey) -> Response:
        """Every site's 12-month budget, with monthly totals in a reporting currency if set."""
        rows = budget.portfolio(
            session,
            last_relamps=last_relamps,
            cleaning_minutes_per_lamp=body.cleaning_minutes_per_lamp,
        )
        return budget_answer(rows, body, "budget-portfolio")


def build_router(last_relamps: LastRelamps) -> APIRouter:
    """The stock routes, handed the query for completed group relamps (from work orders)."""
    router = APIRouter(tags=["stock"])
    _storeroom_routes(router)
    _stock_routes(router)
    _movement_routes(router)
    _demand_routes(router, last_relamps)
    _budget_routes(router, last_relamps)
    return router
