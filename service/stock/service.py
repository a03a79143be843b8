"""Storerooms and their stock lines; hand-made movements. Flushes, never commits."""

from __future__ import annotations

from collections.abc import Sequence

from sqlalchemy import delete, select
from sqlalchemy.exc import IntegrityError
from sqlalchemy.orm import Session

from service.api.errors import Conflict, NotFound
from service.catalogue.models import LampType
from service.db.base import utcnow
from service.db.crud import get_or_404
from service.register.models import Site
from service.stock import ledger
from service.stock.models import StockBalance, StockMovement, Storeroom, StoreroomSite
from service.stock.schemas import BalanceSettings, MovementCreate, StoreroomCreate, StoreroomRead


def get_storeroom(session: Session, storeroom_id: int) -> Storeroom:
    """A storeroom by id (404 if missing)."""
    return get_or_404(session, Storeroom, storeroom_id, "storeroom")


def site_ids_of(session: Session, storeroom_ids: Sequence[int]) -> dict[int, list[int]]:
    """The sites each storeroom serves, by storeroom."""
    out: dict[int, list[int]] = {i: [] for i in storeroom_ids}
    rows = session.execute(
        select(StoreroomSite.storeroom_id, StoreroomSite.site_id)
        .where(StoreroomSite.storeroom_id.in_(list(storeroom_ids)))
        .order_by(StoreroomSite.site_id)
    ).all()
    for room, site in rows:
        out[int(room)].append(int(site))
    return out


def read(session: Session, room: Storeroom) -> StoreroomRead:
    """A storeroom shaped for a response."""
    return StoreroomRead(
        id=room.id,
        name=room.name,
        notes=room.notes,
        site_ids=site_ids_of(session, [room.id])[room.id],
        created_at=room.created_at,
    )


def list_storerooms(session: Session) -> list[Storeroom]:
    """Every storeroom, by id."""
    return list(session.scalars(select(Storeroom).order_by(Storeroom.id)).all())


def create_storeroom(session: Session, body: StoreroomCreate) -> Storeroom:
    """A storeroom serving the given sites (a site served elsewhere moves here)."""
    for i, sid in enumerate(body.site_ids):
        if session.get(Site, sid) is None:
            raise NotFound(
                f"site {sid} does not exist.",
                errors=[{"field": f"site_ids.{i}", "in": "body", "message": "no such site"}],
            )
    if session.scalar(select(Storeroom.id).where(Storeroom.name == body.name)) is not None:
        raise Conflict(
            f"A storeroom named '{body.name}' exists already.",
            errors=[{"field": "name", "in": "body", "message": "already used"}],
        )
    room = Storeroom(name=body.name, notes=body.notes)
    session.add(room)
    try:
        session.flush()
    except IntegrityError as exc:  # a concurrent create of the same name
        raise Conflict(f"A storeroom named '{body.name}' exists already.", field="name") from exc
    for sid in sorted(set(body.site_ids)):
        assign_site(session, room.id, sid)
    return room


def assign_site(session: Session, storeroom_id: int, site_id: int) -> None:
    """Serve a site from this storeroom; lamps already reserved stay where they are held."""
    get_storeroom(session, storeroom_id)
    get_or_404(session, Site, site_id, "site")
    session.execute(delete(StoreroomSite).where(StoreroomSite.site_id == site_id))
    session.add(StoreroomSite(site_id=site_id, storeroom_id=storeroom_id))
    session.flush()


def balances(session: Session, storeroom_id: int) -> list[StockBalance]:
    """A storeroom's stock lines, by lamp type."""
    get_storeroom(session, storeroom_id)
    stmt = (
        select(StockBalance)
        .where(StockBalance.storeroom_id == storeroom_id)
        .order_by(StockBalance.lamp_type_id)
    )
    return list(session.scalars(stmt).all())


def put_balance(
    session: Session, storeroom_id: int, lamp_type_id: int, body: BalanceSettings
) -> tuple[StockBalance, bool]:
    """Set how a lamp type is stocked (creating the line at zero); (balance, created)."""
    get_storeroom(session, storeroom_id)
    get_or_404(session, LampType, lamp_type_id, "lamp type")
    bal = ledger.lock_balance(session, storeroom_id, lamp_type_id)
    created = bal is None
    if bal is None:
        bal = StockBalance(storeroom_id=storeroom_id, lamp_type_id=lamp_type_id)
        session.add(bal)
    for k, v in body.model_dump().items():
        setattr(bal, k, v)
    bal.updated_at = utcnow()
    try:
        session.flush()
    except IntegrityError as exc:  # a concurrent create of the same line
        raise Conflict(
            f"Lamp type {lamp_type_id} was stocked here by another request; read it again."
        ) from exc
    return bal, created


def record(session: Session, storeroom_id: int, body: MovementCreate) -> StockMovement:
    """A hand-made movement on a stocked lamp type (409 when it would go below zero)."""
    get_storeroom(session, storeroom_id)
    bal = ledger.lock_balance(session, storeroom_id, body.lamp_type_id)
    if bal is None:
        raise NotFound(
            f"Lamp type {body.lamp_type_id} is not stocked in storeroom {storeroom_id}; "
            "set it up with PUT .../stock/{lamp_type_id} first.",
            errors=[{"field": "lamp_type_id", "in": "body", "message": "not stocked here"}],
        )
    return ledger.move(session, bal, body.kind, body.quantity, note=body.note)
