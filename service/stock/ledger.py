"""The stock ledger: every change to a balance is a movement, written under the balance's lock.

A balance row per (storeroom, lamp type) holds the running sums of its movements
(on_hand = sum of on_hand_delta, reserved = sum of reserved_delta). A movement locks the row
(SELECT ... FOR UPDATE on PostgreSQL; SQLite writers already run one at a time under BEGIN
IMMEDIATE), checks the rule, writes itself and the new sums; the version column catches a
writer that skipped the lock (409). On-hand and available lamps never go below zero except
through an explicit count, which records what is really on the shelf.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass
from datetime import datetime

from sqlalchemy import func, select
from sqlalchemy.orm import Session
from sqlalchemy.orm.exc import StaleDataError

from service.api.errors import Conflict, Invalid, NotFound
from service.db.base import utcnow
from service.stock.models import MovementKind, StockBalance, StockMovement, StoreroomSite

K = MovementKind


@dataclass(frozen=True)
class Effect:
    """A movement's change to on-hand and reserved lamps."""

    on_hand: int
    reserved: int


def storeroom_of_site(session: Session, site_id: int) -> int | None:
    """The storeroom serving a site (None when it has none)."""
    return session.scalar(
        select(StoreroomSite.storeroom_id).where(StoreroomSite.site_id == site_id)
    )


def stocks_anything(session: Session, storeroom_id: int) -> bool:
    """True when the storeroom has a balance row for any lamp type."""
    found = session.scalar(
        select(StockBalance.id).where(StockBalance.storeroom_id == storeroom_id).limit(1)
    )
    return found is not None


def lock_balance(session: Session, storeroom_id: int, lamp_type_id: int) -> StockBalance | None:
    """The balance row, locked until the transaction ends (None: the type is not stocked)."""
    stmt = (
        select(StockBalance)
        .where(StockBalance.storeroom_id == storeroom_id, StockBalance.lamp_type_id == lamp_type_id)
        .with_for_update()
        .execution_options(populate_existing=True)
    )
    return session.scalars(stmt).one_or_none()


def lock_balances(
    session: Session, storeroom_id: int, lamp_type_ids: Sequence[int]
) -> dict[int, StockBalance]:
    """Balances of several types, locked in lamp-type order (so two writers never deadlock)."""
    out: dict[int, StockBalance] = {}
    for lt in sorted(set(lamp_type_ids)):
        b = lock_balance(session, storeroom_id, lt)
        if b is not None:
            out[lt] = b
    return out


def order_reserved(session: Session, work_order_id: int) -> dict[tuple[int, int], int]:
    """Lamps still reserved for an order, by (storeroom, lamp type)."""
    rows = session.execute(
        select(
            StockMovement.storeroom_id,
            StockMovement.lamp_type_id,
            func.sum(StockMovement.reserved_delta),
        )
        .where(StockMovement.work_order_id == work_order_id)
        .group_by(StockMovement.storeroom_id, StockMovement.lamp_type_id)
    ).all()
    return {(int(s), int(lt)): int(q or 0) for s, lt, q in rows}


def step_done(session: Session, work_order_id: int, step: str, lamp_type_id: int) -> bool:
    """True when an order's hook already wrote this step for this lamp type (a retry)."""
    found = session.scalar(
        select(StockMovement.id).where(
            StockMovement.work_order_id == work_order_id,
            StockMovement.step == step,
            StockMovement.lamp_type_id == lamp_type_id,
        )
    )
    return found is not None


def _short(balance: StockBalance, wanted: int, usable: int, field: str) -> Conflict:
    return Conflict(
        f"Only {usable} lamp(s) of lamp type {balance.lamp_type_id} are available in "
        f"storeroom {balance.storeroom_id}; {wanted} are needed. Receive or count stock first.",
        errors=[{"field": field, "in": "body", "message": "not enough stock"}],
        lamp_type_id=balance.lamp_type_id,
        storeroom_id=balance.storeroom_id,
        available=usable,
        needed=wanted,
    )


def effect(
    balance: StockBalance, kind: str, quantity: int, own_reserved: int = 0, field: str = "quantity"
) -> Effect:
    """The change a movement makes, or the 409 (422 for a bad quantity) that refuses it.

    own_reserved: lamps already reserved for the order the movement belongs to; an issue
    takes them first, a release gives back at most them.
    """
    if quantity < 0 or (quantity == 0 and kind != K.COUNTED):
        raise Invalid(
            "quantity must be a positive whole number of lamps (a count may be 0).",
            errors=[{"field": field, "in": "body", "message": "out of range"}],
        )
    available = balance.on_hand - balance.reserved
    if kind in (K.RECEIVED, K.RETURNED):
        return Effect(quantity, 0)
    if kind == K.RESERVED:
        if quantity > available:
            raise _short(balance, quantity, available, field)
        return Effect(0, quantity)
    if kind == K.RELEASED:
        if quantity > own_reserved:
            raise Conflict(
                f"Only {own_reserved} lamp(s) are reserved here; {quantity} cannot be released.",
                errors=[{"field": field, "in": "body", "message": "more than reserved"}],
            )
        return Effect(0, -quantity)
    if kind == K.ISSUED:
        from_reservation = min(quantity, own_reserved)
        if quantity - from_reservation > available:
            raise _short(balance, quantity, available + from_reservation, field)
        return Effect(-quantity, -from_reservation)
    if kind == K.COUNTED:
        return Effect(quantity - balance.on_hand, 0)
    raise Invalid(
        f"unknown movement kind '{kind}'",
        errors=[{"field": "kind", "in": "body", "message": "unknown kind"}],
    )


def move(
    session: Session,
    balance: StockBalance,
    kind: str,
    quantity: int,
    *,
    own_reserved: int = 0,
    work_order_id: int | None = None,
    step: str | None = None,
    note: str | None = None,
    at: datetime | None = None,
    field: str = "quantity",
) -> StockMovement:
    """Apply one movement to a locked balance and write it to the ledger (flushes)."""
    eff = effect(balance, kind, quantity, own_reserved, field)
    now = at or utcnow()
    mv = StockMovement(
        storeroom_id=balance.storeroom_id,
        lamp_type_id=balance.lamp_type_id,
        kind=str(kind),
        quantity=quantity,
        on_hand_delta=eff.on_hand,
        reserved_delta=eff.reserved,
        work_order_id=work_order_id,
        step=step,
        note=note,
        at=now,
    )
    session.add(mv)
    balance.on_hand += eff.on_hand
    balance.reserved += eff.reserved
    balance.updated_at = now
    try:
        session.flush()
    except StaleDataError as exc:
        raise Conflict(
            f"Stock of lamp type {balance.lamp_type_id} changed meanwhile; try again."
        ) from exc
    return mv


def get_balance(session: Session, storeroom_id: int, lamp_type_id: int) -> StockBalance:
    """A balance (404 when the type is not stocked there)."""
    b = session.scalar(
        select(StockBalance).where(
            StockBalance.storeroom_id == storeroom_id, StockBalance.lamp_type_id == lamp_type_id
        )
    )
    if b is None:
        raise NotFound(
            f"Lamp type {lamp_type_id} is not stocked in storeroom {storeroom_id}.",
            resource="stock balance",
            id=lamp_type_id,
        )
    return b


def ledger_sums(session: Session, storeroom_id: int, lamp_type_id: int) -> tuple[int, int]:
    """(on_hand, reserved) summed from the movements: what the balance row must equal."""
    row = session.execute(
        select(
            func.coalesce(func.sum(StockMovement.on_hand_delta), 0),
            func.coalesce(func.sum(StockMovement.reserved_delta), 0),
        ).where(
            StockMovement.storeroom_id == storeroom_id, StockMovement.lamp_type_id == lamp_type_id
        )
    ).one()
    return int(row[0]), int(row[1])
