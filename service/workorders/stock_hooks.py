"""Work-order moves as stock movements: issue reserves, completion issues, cancel releases.

Only lamp types stocked in the order's storeroom (a balance row exists) move; others are
bought to the job and pass no shelf. Each hook movement is keyed by (order, step, lamp
type), unique in the ledger, and checked before it is written, so a retried move never
doubles. Callers hold the order's row lock, so one order's hooks never run side by side;
balances are locked in lamp-type order.
"""

from __future__ import annotations

from collections import Counter
from collections.abc import Mapping

from sqlalchemy.orm import Session

from service.stock import ledger
from service.stock.models import MovementKind
from service.workorders.models import LineOutcome, WorkOrder

ISSUED_STEP = "issued"  # reservation when an order is issued
COMPLETED_STEP = "completed"  # lamps fitted
COMPLETED_RELEASE_STEP = "completed_release"  # what the completion did not use
CANCELLED_STEP = "cancelled"  # reservation released on cancel
SETTLED_STEP = "settled"  # a spot order settled by the group order covering it


def _needs(order: WorkOrder) -> Counter[int]:
    """Lamps per lamp type the order's lines call for."""
    need: Counter[int] = Counter()
    for ln in order.lines:
        need[ln.lamp_type_id] += ln.quantity
    return need


def on_issued(session: Session, order: WorkOrder) -> None:
    """Reserve the order's lamps: all it needs, or what is available when stock is short."""
    room = ledger.storeroom_of_site(session, order.site_id)
    if room is None:
        return
    need = _needs(order)
    for lt, bal in ledger.lock_balances(session, room, list(need)).items():
        qty = min(need[lt], max(bal.available, 0))
        if qty <= 0 or ledger.step_done(session, order.id, ISSUED_STEP, lt):
            continue
        ledger.move(
            session, bal, MovementKind.RESERVED, qty, work_order_id=order.id, step=ISSUED_STEP
        )


def site_stocks_anything(session: Session, site_id: int) -> bool:
    """True when the site's storeroom stocks at least one lamp type."""
    room = ledger.storeroom_of_site(session, site_id)
    return room is not None and ledger.stocks_anything(session, room)


def on_created_issued(
    session: Session, site_id: int, needs: Mapping[int, Mapping[int, int]]
) -> None:
    """Reserve for orders just created issued (the weekly run), lowest id first.

    needs: order id -> lamps per lamp type its lines call for (the lines the run wrote,
    not reloaded as ORM objects). The storeroom is looked up and its balances locked once
    for all of the run's orders, in lamp-type order; orders this transaction created have
    no movements yet, so no step is looked up (on_issued checks it for a retried issue).
    """
    room = ledger.storeroom_of_site(session, site_id)
    if room is None or not needs:
        return
    balances = ledger.lock_balances(session, room, sorted({lt for n in needs.values() for lt in n}))
    for oid in sorted(needs):
        for lt, bal in balances.items():
            qty = min(needs[oid].get(lt, 0), max(bal.available, 0))
            if qty > 0:
                ledger.move(
                    session, bal, MovementKind.RESERVED, qty, work_order_id=oid, step=ISSUED_STEP
                )


def _release_all(session: Session, order: WorkOrder, step: str) -> None:
    held = ledger.order_reserved(session, order.id)
    rooms = sorted({room for room, _ in held})
    for room in rooms:
        types = [lt for r, lt in held if r == room and held[(r, lt)] > 0]
        for lt, bal in ledger.lock_balances(session, room, types).items():
            if ledger.step_done(session, order.id, step, lt):
                continue
            qty = held[(room, lt)]
            ledger.move(
                session,
                bal,
                MovementKind.RELEASED,
                qty,
                own_reserved=qty,
                work_order_id=order.id,
                step=step,
            )


def on_cancelled(session: Session, order: WorkOrder) -> None:
    """Give the order's reservations back to the shelf."""
    _release_all(session, order, CANCELLED_STEP)


def on_settled(session: Session, order: WorkOrder) -> None:
    """A spot order done by its covering group order: its own reservations go back."""
    _release_all(session, order, SETTLED_STEP)


def used_lamps(order: WorkOrder) -> Counter[int]:
    """Lamps fitted per lamp type: every position not skipped (line outcomes set first)."""
    used: Counter[int] = Counter()
    for ln in order.lines:
        if ln.position_outcomes is None:
            continue
        used[ln.lamp_type_id] += sum(
            1 for e in ln.position_outcomes if e["outcome"] != LineOutcome.SKIPPED
        )
    return used


def on_completed(session: Session, order: WorkOrder, used: Mapping[int, int] | None = None) -> None:
    """Issue the lamps fitted (from the reservation first), release the rest; 409 if short.

    The shortage check runs for every stocked type before anything moves, so a refused
    completion writes nothing (the request's transaction is rolled back anyway).
    """
    used = used_lamps(order) if used is None else used
    held = ledger.order_reserved(session, order.id)
    room = ledger.storeroom_of_site(session, order.site_id)
    # Each type issues from the storeroom holding its reservation, else the site's one.
    room_of: dict[int, int] = {lt: r for (r, lt), q in held.items() if q > 0}
    for lt in used:
        if lt not in room_of and room is not None:
            room_of[lt] = room
    by_room: dict[int, list[int]] = {}
    for lt, r in room_of.items():
        by_room.setdefault(r, []).append(lt)
    locked = {r: ledger.lock_balances(session, r, lts) for r, lts in sorted(by_room.items())}
    for r, bals in locked.items():
        for lt, bal in bals.items():
            qty, own = used.get(lt, 0), held.get((r, lt), 0)
            if qty and not ledger.step_done(session, order.id, COMPLETED_STEP, lt):
                ledger.effect(bal, MovementKind.ISSUED, qty, own, field="outcomes")  # 409 if short
    for r, bals in locked.items():
        for lt, bal in bals.items():
            qty, own = used.get(lt, 0), held.get((r, lt), 0)
            if qty and not ledger.step_done(session, order.id, COMPLETED_STEP, lt):
                ledger.move(
                    session,
                    bal,
                    MovementKind.ISSUED,
                    qty,
                    own_reserved=own,
                    work_order_id=order.id,
                    step=COMPLETED_STEP,
                    field="outcomes",
                )
            left = own - min(qty, own)
            if left > 0 and not ledger.step_done(session, order.id, COMPLETED_RELEASE_STEP, lt):
                ledger.move(
                    session,
                    bal,
                    MovementKind.RELEASED,
                    left,
                    own_reserved=left,
                    work_order_id=order.id,
                    step=COMPLETED_RELEASE_STEP,
                )
