"""HTTP routes for storerooms: stock lines, the ledger, demand, the to-order list, budgets."""

from __future__ import annotations

from fastapi import APIRouter, Request, Response, status

from service.api.auth import ReadKey, SessionDep, WriteKey
from service.api.ids import IdPath, IdQuery
from service.api.pagination import Page, PageDep, page_of, paginate
from service.api.preconditions import locate
from service.planning.service import LastRelamps
from service.stock import ledger, service
from service.stock import repository as repo
from service.stock.models import StockBalance, StockMovement
from service.stock.schemas import (
    BalanceRead,
    BalanceSettings,
    ManualKind,
    MovementCreate,
    MovementRead,
    StoreroomCreate,
    StoreroomRead,
)


def balance_read(b: StockBalance) -> BalanceRead:
    """A stock line shaped for a response."""
    return BalanceRead.model_validate(b)


def build_router(last_relamps: LastRelamps) -> APIRouter:
    """The stock routes, handed the query for completed group relamps (from work orders)."""
    router = APIRouter(tags=["stock"])

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

    _ = last_relamps  # used by the demand routes (stock.demand_router)
    return router
