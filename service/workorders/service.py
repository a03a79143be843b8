"""Work order rules: lifecycle, completion, cancellation. Flushes, never commits.

States (plain words of our own) and the only moves allowed:
    draft -> issued | cancelled
    issued -> in_progress | cancelled
    in_progress -> done | cancelled
    done, cancelled: final.
"""

from __future__ import annotations

from collections.abc import Container, Sequence
from datetime import UTC, datetime, timedelta
from typing import Any

from sqlalchemy import func, select
from sqlalchemy.exc import IntegrityError
from sqlalchemy.orm import Session, object_session
from sqlalchemy.orm.exc import StaleDataError

from service.api.errors import Conflict, Invalid, NotFound
from service.api.lookups import refuse_taken_reference
from service.db.base import utcnow
from service.db.crud import apply_patch, get_or_404
from service.db.locks import lock_site
from service.events import removals, reports
from service.events.checks import as_aware
from service.register.models import Area, LampPosition, Site
from service.workorders import choice_hooks, stock_hooks
from service.workorders.issue import GROUP, SPOT, issue_orders
from service.workorders.models import (
    OPEN_STATES,
    LineOutcome,
    WorkOrder,
    WorkOrderLine,
    WorkOrderState,
)
from service.workorders.schemas import CancelBody, CompleteBody, WorkOrderCreate, WorkOrderUpdate

_S = WorkOrderState
TRANSITIONS: dict[str, tuple[WorkOrderState, ...]] = {
    _S.DRAFT: (_S.ISSUED, _S.CANCELLED),
    _S.ISSUED: (_S.IN_PROGRESS, _S.CANCELLED),
    _S.IN_PROGRESS: (_S.DONE, _S.CANCELLED),
    _S.DONE: (),
    _S.CANCELLED: (),
}
CLOCK_SKEW = timedelta(minutes=5)  # completion times this far ahead of our clock are accepted


def get_order(session: Session, order_id: int) -> WorkOrder:
    """An order by id (404 if missing)."""
    return get_or_404(session, WorkOrder, order_id, "work order")


def lock_order(session: Session, order_id: int) -> WorkOrder:
    """An order loaded for a change: row-locked (FOR UPDATE) where the database has row locks.

    The lock makes a second writer wait for the first to commit and then read its result;
    the version column (checked in every UPDATE) catches any writer that skipped the lock.
    SQLite has no row locks, but its writer transactions (BEGIN IMMEDIATE) already run one
    at a time.
    """
    stmt = (
        select(WorkOrder)
        .where(WorkOrder.id == order_id)
        .with_for_update()
        .execution_options(populate_existing=True)
    )
    order = session.scalars(stmt).one_or_none()
    if order is None:
        raise NotFound(f"work order {order_id} does not exist.", resource="work order", id=order_id)
    return order


def flush_order(session: Session, order: WorkOrder) -> None:
    """Flush an order's changes; a concurrent change since it was read is a 409."""
    try:
        session.flush()
    except StaleDataError as exc:
        raise Conflict(
            f"Work order {order.id} was changed by another request; read it again.",
            work_order_id=order.id,
        ) from exc


def _already(order: WorkOrder, to: str) -> bool:
    """True when the order is already in the target state (a retried call: answer 200)."""
    return order.state == to


def _move(order: WorkOrder, to: str, at: datetime) -> None:
    allowed = TRANSITIONS[order.state]
    if to not in allowed:
        nxt = ", ".join(allowed) if allowed else "none (final state)"
        raise Conflict(
            f"Work order {order.id} is '{order.state}'; it cannot become '{to}'. "
            f"Allowed next: {nxt}.",
            current_state=order.state,
            allowed_next=list(allowed),
        )
    order.state = to
    order.state_changed_at = at
    order.updated_at = at


def _simple_move(session: Session, order_id: int, to: str) -> WorkOrder:
    order = lock_order(session, order_id)
    if _already(order, to):
        return order
    _move(order, to, utcnow())
    flush_order(session, order)
    return order


def issue(session: Session, order_id: int) -> WorkOrder:
    """draft -> issued, reserving its stocked lamps (a repeat answers it unchanged)."""
    order = lock_order(session, order_id)
    if _already(order, WorkOrderState.ISSUED):
        return order
    _move(order, WorkOrderState.ISSUED, utcnow())
    flush_order(session, order)
    stock_hooks.on_issued(session, order)
    return order


def start(session: Session, order_id: int) -> WorkOrder:
    """issued -> in_progress (a repeat on a started order answers it unchanged)."""
    return _simple_move(session, order_id, WorkOrderState.IN_PROGRESS)


def cancel(session: Session, order_id: int, body: CancelBody) -> WorkOrder:
    """Cancel an open order: positions stay as they were; batched reports go back to open."""
    order = lock_order(session, order_id)
    if _already(order, WorkOrderState.CANCELLED):
        if body.reason is not None and body.reason != order.cancel_reason:
            raise Conflict(
                f"Work order {order.id} is already cancelled with another reason.",
                current_state=order.state,
                allowed_next=[],
            )
        return order
    now = utcnow()
    _move(order, WorkOrderState.CANCELLED, now)
    order.cancel_reason = body.reason
    reports.reopen_reports(session, order.id)
    stock_hooks.on_cancelled(session, order)
    for spot in _covered_open(session, order):  # they stay open, to be done on their own
        spot.covered_by_order_id = None
        spot.updated_at = now
    flush_order(session, order)
    return order


def _covered_open(session: Session, order: WorkOrder) -> list[WorkOrder]:
    """The open spot orders a group order covers, each row-locked (lowest id first)."""
    ids = session.scalars(
        select(WorkOrder.id)
        .where(WorkOrder.covered_by_order_id == order.id, WorkOrder.state.in_(OPEN_STATES))
        .order_by(WorkOrder.id)
    ).all()
    spots = [lock_order(session, i) for i in ids]
    return [s for s in spots if s.state in OPEN_STATES and s.covered_by_order_id == order.id]


def _settle_covered(spots: list[WorkOrder], order: WorkOrder, at: datetime, now: datetime) -> None:
    """A done group order settles the spot orders it covers: done, no removals of their own.

    The group order already replaced (and recorded) their lamps and closed their reports;
    reports of positions it did not replace (skipped there) go back to open.
    """
    for spot in spots:
        session = object_session(spot)
        assert session is not None
        reopened = reports.reopen_reports(session, spot.id)
        note = f"Replaced by group order {order.id}."
        if reopened:
            note += f" {reopened} burnout report(s) reopened: skipped on the group order."
        spot.notes = note if not spot.notes else f"{spot.notes}\n{note}"[-2000:]
        stock_hooks.on_settled(session, spot)
        spot.state = WorkOrderState.DONE
        spot.state_changed_at = now
        spot.completed_at = at
        spot.updated_at = now


def update(session: Session, order_id: int, body: WorkOrderUpdate) -> WorkOrder:
    """Change the external reference, notes or due date (any state)."""
    order = lock_order(session, order_id)
    refuse_taken_reference(
        session, WorkOrder, body.external_reference, "Work order", exclude_id=order_id
    )
    apply_patch(order, body)
    order.updated_at = utcnow()
    flush_order(session, order)
    return order


def create(session: Session, body: WorkOrderCreate) -> WorkOrder:
    """A draft order for one area: all its fixtures (group) or its open burnouts (spot)."""
    area = get_or_404(session, Area, body.area_id, "area")
    refuse_taken_reference(session, WorkOrder, body.external_reference, "Work order")
    site = session.get(Site, area.site_id)
    assert site is not None
    # The weekly run takes the same lock: hand-made and scheduled orders never interleave.
    lock_site(session, site.id)
    if body.kind == GROUP:
        open_group = session.scalar(
            select(WorkOrder.id).where(
                WorkOrder.area_id == area.id,
                WorkOrder.kind == GROUP,
                WorkOrder.state.in_(OPEN_STATES),
            )
        )
        if open_group is not None:
            raise Conflict(
                f"Area {area.id} already has open group order {open_group}.",
                work_order_id=open_group,
            )
    try:
        result = issue_orders(
            session,
            site,
            at=utcnow(),
            iso_week=None,
            run_id=None,
            state=WorkOrderState.DRAFT,
            lookahead_weeks=0,
            area_id=area.id,
            kinds=(body.kind,),
            whole_area=True,
        )
    except IntegrityError as exc:  # the open-group index: a concurrent create won
        raise Conflict(f"Area {area.id} already has an open group order.", field="area_id") from exc
    if not result.created:
        what = "lamp positions" if body.kind == GROUP else "open burnout reports"
        raise Conflict(f"Area {area.id} has no {what} to put on an order.", field="area_id")
    order = get_order(session, result.created[0][0])
    order.notes = body.notes
    order.external_reference = body.external_reference
    if body.due_on is not None:
        order.due_on = body.due_on
    session.flush()
    return order


Entry = tuple[int, str, str | None]  # (position id, outcome, reason)
Resolved = dict[int, list[Entry]]  # line id -> its positions' outcomes, in position order
REPLACED, FOUND_DARK, SKIPPED = LineOutcome.REPLACED, LineOutcome.FOUND_DARK, LineOutcome.SKIPPED


def _err(field: str, message: str) -> dict[str, str]:
    return {"field": field, "in": "body", "message": message}


def _by_id(
    items: Sequence[Any], key: str, where: str, known: Container[int], errors: list[dict[str, str]]
) -> dict[int, tuple[str, str | None]]:
    """(outcome, reason) per id named by `key`; an id not in `known` or given twice is an error."""
    got: dict[int, tuple[str, str | None]] = {}
    for i, item in enumerate(items):
        at = getattr(item, key)
        if at not in known:
            errors.append(_err(f"{where}.{i}.{key}", "not on this order"))
        elif at in got:
            errors.append(_err(f"{where}.{i}.{key}", "given twice"))
        else:
            got[at] = (item.outcome, item.reason)
    return got


def _outcomes(order: WorkOrder, body: CompleteBody) -> Resolved:
    """Each line's per-position outcomes from the body (positions override fixtures)."""
    by_fixture = {ln.fixture_id: ln for ln in order.lines}
    on_order = {pid for ln in order.lines for pid in ln.position_ids}
    errors: list[dict[str, str]] = []
    fixture_got = _by_id(body.outcomes, "fixture_id", "outcomes", by_fixture, errors)
    pos_got = _by_id(body.positions, "position_id", "positions", on_order, errors)
    missing = [
        f
        for f, ln in by_fixture.items()
        if f not in fixture_got and any(pid not in pos_got for pid in ln.position_ids)
    ]
    if missing and body.others is None:
        errors.append(
            _err("outcomes", f"no outcome for fixtures {missing[:20]}; list them or set 'others'")
        )
    if errors:
        raise Invalid("Some fixture or position outcomes are wrong or missing.", errors=errors)
    out: Resolved = {}
    for ln in order.lines:
        default = fixture_got.get(ln.fixture_id, (REPLACED, None))
        out[ln.id] = [(pid, *pos_got.get(pid, default)) for pid in ln.position_ids]
    return out


def _summary(entries: list[Entry]) -> tuple[str, str | None]:
    """A line's outcome and skip reason from its positions' outcomes."""
    skipped = [e for e in entries if e[1] == SKIPPED]
    reasons = "; ".join(dict.fromkeys(e[2] for e in skipped if e[2])) or None
    if not skipped:
        return REPLACED, None
    outcome = SKIPPED if len(skipped) == len(entries) else LineOutcome.PARTIAL
    return outcome, reasons[:500] if reasons else None


def _check_time(order: WorkOrder, at: datetime, now: datetime) -> None:
    if at.tzinfo is None:
        raise Invalid(
            "completed_at needs a UTC offset.",
            errors=[_err("completed_at", "no offset")],
        )
    if at > now + CLOCK_SKEW or at < order.created_at - CLOCK_SKEW:
        raise Invalid(
            "completed_at must lie between the order's creation and now.",
            errors=[_err("completed_at", "out of range")],
        )


def complete(session: Session, order_id: int, body: CompleteBody) -> WorkOrder:
    """in_progress -> done with per-fixture or per-position outcomes; new lamps start at zero."""
    order = lock_order(session, order_id)
    if _already(order, WorkOrderState.DONE):
        return _repeat_of_completion(order, body)
    if WorkOrderState.DONE not in TRANSITIONS[order.state]:
        _move(order, WorkOrderState.DONE, utcnow())  # raises the 409 with the allowed moves
    # Lock covered spot orders before reading positions: a concurrent completion of one of
    # them finishes first (and is then skipped), so no lamp is recorded twice.
    covered = _covered_open(session, order)
    now = utcnow()
    at = body.completed_at or now
    _check_time(order, at, now)
    resolved = _outcomes(order, body)
    for ln in order.lines:
        entries = resolved[ln.id]
        ln.outcome, ln.skip_reason = _summary(entries)
        ln.position_outcomes = [
            {"position_id": pid, "outcome": str(o), "reason": r} for pid, o, r in entries
        ]
    choice_hooks.check_switched(session, order, resolved)  # 422 before any write
    stock_hooks.on_completed(session, order)  # 409 before any removal when stock is short
    _record(session, order, resolved, at)  # removals keep the lamp type taken out
    choice_hooks.switch_fixtures(session, order)  # then the fixture gets the type fitted
    reports.reopen_reports(session, order.id)  # reports of skipped positions reopen
    _settle_covered(covered, order, at, now)
    _move(order, WorkOrderState.DONE, now)
    order.completed_at = at
    flush_order(session, order)
    return order


def _record(session: Session, order: WorkOrder, resolved: Resolved, at: datetime) -> None:
    """Removals for every lamp taken out; close the reports those lamps answer."""
    taken = {pid: o for entries in resolved.values() for pid, o, _ in entries if o != SKIPPED}
    positions = {
        p.id: p
        for p in session.scalars(select(LampPosition).where(LampPosition.id.in_(list(taken))))
    }
    open_reports = reports.not_closed_on_positions(session, list(taken))
    to_close: list[int] = []
    found_dark: dict[int, datetime] = {}  # no report: failed since the area's last visit
    dark_positions: list[LampPosition] = []
    burning_positions: list[LampPosition] = []
    for pid, outcome in taken.items():
        pos = positions.get(pid)
        if pos is None:  # the position was removed from the register meanwhile
            continue
        # Found dark without a report is still a failure: recording it as censored
        # ("still burning") would bias the field life upwards.
        dark = outcome == FOUND_DARK or pos.burned_out_at is not None or pid in open_reports
        if order.kind == SPOT and not dark:
            continue  # another order (e.g. this week's group relamp) already replaced it
        (dark_positions if dark else burning_positions).append(pos)
        if outcome == FOUND_DARK and pos.burned_out_at is None and pid not in open_reports:
            found_dark[pid] = max(as_aware(pos.lamp_installed_at), _last_visit(session, order, at))
        to_close.extend(open_reports.get(pid, []))
    # Burned-out lamps are failures (their report already wrote the record: it is reused);
    # lamps still burning at a group relamp are censored observations.
    for group, failed, reason in (
        (dark_positions, True, "burnout"),
        (burning_positions, False, "group_relamp"),  # a removal reason, not a kind
    ):
        if group:
            removals.record_removals(
                session,
                group,
                removed_at=at,
                failed=failed,
                reason=reason,
                work_order_id=order.id,
                found_dark_since=found_dark if failed else None,
            )
    if to_close:
        reports.close_reports(session, sorted(set(to_close)), order.id, closed_at=at)


def _last_visit(session: Session, order: WorkOrder, at: datetime) -> datetime:
    """The last completed order in the order's area before `at` (assumption: a team working
    in an area reports the lamps it sees dark), else the start of time."""
    last = session.scalar(
        select(func.max(WorkOrder.completed_at)).where(
            WorkOrder.area_id == order.area_id,
            WorkOrder.state == WorkOrderState.DONE,
            WorkOrder.id != order.id,
            WorkOrder.completed_at <= at,
        )
    )
    return as_aware(last) if last is not None else datetime.min.replace(tzinfo=UTC)


def _recorded(ln: WorkOrderLine) -> list[Entry]:
    """A done line's per-position outcomes (lines done before they were stored: derived)."""
    if ln.position_outcomes is not None:
        return [(e["position_id"], e["outcome"], e.get("reason")) for e in ln.position_outcomes]
    return [(pid, ln.outcome or "", ln.skip_reason) for pid in ln.position_ids]


def _repeat_of_completion(order: WorkOrder, body: CompleteBody) -> WorkOrder:
    """A completion sent again: the same outcomes answer the order; other outcomes are 409.

    Compared per position, so a retry in either form (per fixture or per position) matches.
    """
    recorded = {ln.id: _recorded(ln) for ln in order.lines}
    same_time = body.completed_at is None or body.completed_at == order.completed_at
    if same_time and _outcomes(order, body) == recorded:
        return order
    raise Conflict(
        f"Work order {order.id} is already done with other outcomes; nothing was changed.",
        current_state=order.state,
        allowed_next=[],
    )


def lines_of(session: Session, order_id: int) -> list[WorkOrderLine]:
    """An order's lines in print order (location, then tag)."""
    get_order(session, order_id)
    stmt = (
        select(WorkOrderLine)
        .where(WorkOrderLine.work_order_id == order_id)
        .order_by(WorkOrderLine.location, WorkOrderLine.fixture_tag, WorkOrderLine.id)
    )
    return list(session.scalars(stmt).all())
