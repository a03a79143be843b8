"""Burnout report states: open (dark, no order), ordered (on an open work order), closed.

Every change of a report's state goes through this module. Services flush; the caller's
transaction commits.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from datetime import datetime

from sqlalchemy import inspect, select, update
from sqlalchemy.orm import Session

from service.api.errors import Conflict
from service.db.base import utcnow
from service.db.bulk import id_pairs
from service.events.checks import as_aware
from service.events.models import BurnoutReport, BurnoutReportState
from service.events.repository import report_query

OPEN, ORDERED, CLOSED = (
    BurnoutReportState.OPEN,
    BurnoutReportState.ORDERED,
    BurnoutReportState.CLOSED,
)


def new_report(
    session: Session,
    *,
    site_id: int,
    area_id: int,
    fixture_id: int,
    position_id: int,
    reported_at: datetime,
    burn_hours: float | None,
    note: str | None,
    removal_id: int,
    replaced: bool,
) -> BurnoutReport:
    """A new report: open, or closed at once when the lamp was replaced on the spot."""
    report = BurnoutReport(
        site_id=site_id,
        area_id=area_id,
        fixture_id=fixture_id,
        position_id=position_id,
        reported_at=reported_at,
        burn_hours=burn_hours,
        status=CLOSED if replaced else OPEN,
        closed_at=reported_at if replaced else None,
        note=note,
        removal_id=removal_id,
    )
    session.add(report)
    return report


def open_burnout_reports(
    session: Session, *, site_id: int | None = None, area_id: int | None = None
) -> list[BurnoutReport]:
    """Reports still "open" (dark lamps no work order has taken in), oldest first."""
    stmt = report_query(site_id=site_id, area_id=area_id, status=OPEN)
    return list(session.scalars(stmt.order_by(BurnoutReport.reported_at, BurnoutReport.id)))


def take_for_order(
    session: Session, report_ids: Sequence[int], work_order_id: int, *, at: datetime
) -> None:
    """Put open reports on a work order ("ordered"); 409 if any is no longer open."""
    take_for_orders(session, {r: work_order_id for r in report_ids}, at=at)


def take_for_orders(session: Session, order_of: Mapping[int, int], *, at: datetime) -> None:
    """Put open reports on their orders (report id -> order id); 409 if any is no longer open.

    One UPDATE ... FROM a table of (report, order) pairs bound as two arrays (db.bulk), for
    any number of reports: no IN list and CASE of one bound value per report to render and
    parse (a 3,000-report weekly run spent most of this step there). The state test sits in
    the UPDATE itself, so of two transactions taking the same report only one changes its
    row: a report belongs to at most one open order.
    """
    ids = sorted(order_of)
    if not ids:
        return
    pairs = id_pairs(session, ("report_id", "order_id"), ids, [order_of[r] for r in ids])
    stmt = (
        update(BurnoutReport)
        .where(BurnoutReport.id == pairs.c.report_id, BurnoutReport.status == OPEN)
        .values(
            status=ORDERED,
            work_order_id=pairs.c.order_id,
            updated_at=at,
            version=BurnoutReport.version + 1,
        )
        .returning(BurnoutReport.id)
    )
    opts = {"synchronize_session": False}  # loaded reports are expired below instead
    taken = list(session.execute(stmt, execution_options=opts).scalars().all())
    _expire_loaded(session, taken)
    if len(taken) != len(ids):
        raise Conflict(
            f"{len(ids) - len(taken)} of these burnout reports are already on another order.",
            field="report_ids",
        )


def _expire_loaded(session: Session, report_ids: list[int]) -> None:
    """Expire the reports of these ids the session holds, so none keeps a stale version."""
    wanted = set(report_ids)
    for obj in list(session.identity_map.values()):
        if isinstance(obj, BurnoutReport):
            ident = inspect(obj).identity  # the key held, without loading an expired row
            if ident is not None and ident[0] in wanted:
                session.expire(obj)


def mark_ordered(
    session: Session, report_ids: Sequence[int], work_order_id: int
) -> list[BurnoutReport]:
    """Attach open reports to a spot work order (status "ordered"; still dark); 409 if taken."""
    take_for_order(session, report_ids, work_order_id, at=utcnow())
    session.expire_all()
    return list(
        session.scalars(select(BurnoutReport).where(BurnoutReport.id.in_(list(report_ids))))
    )


def reopen_reports(session: Session, work_order_id: int) -> int:
    """Return a cancelled order's "ordered" reports to "open"; how many."""
    result = session.execute(
        update(BurnoutReport)
        .where(BurnoutReport.work_order_id == work_order_id, BurnoutReport.status == ORDERED)
        .values(status=OPEN, work_order_id=None, version=BurnoutReport.version + 1)
    )
    session.flush()
    return int(getattr(result, "rowcount", 0) or 0)


def close_reports(
    session: Session,
    report_ids: Sequence[int],
    work_order_id: int | None,
    *,
    closed_at: datetime | None = None,
) -> list[BurnoutReport]:
    """Close reports (a work order or a replacement dealt with them); closed ones are skipped."""
    reports = list(
        session.scalars(
            select(BurnoutReport).where(
                BurnoutReport.id.in_(list(report_ids)), BurnoutReport.status != CLOSED
            )
        )
    )
    when = utcnow() if closed_at is None else as_aware(closed_at)
    for r in reports:
        r.status = CLOSED
        r.closed_at = when
        if work_order_id is not None:
            r.work_order_id = work_order_id
    session.flush()
    return reports


def close_open_for_positions(
    session: Session, position_ids: Sequence[int], work_order_id: int | None, at: datetime
) -> None:
    """Close every report not yet closed on these positions, as of `at`."""
    ids = session.scalars(
        select(BurnoutReport.id).where(
            BurnoutReport.position_id.in_(list(position_ids)), BurnoutReport.status != CLOSED
        )
    ).all()
    close_reports(session, list(ids), work_order_id, closed_at=at)


def not_closed_on_positions(session: Session, position_ids: Sequence[int]) -> dict[int, list[int]]:
    """Reports not yet closed (open or ordered), per position."""
    out: dict[int, list[int]] = {}
    ids = list(position_ids)
    for i in range(0, len(ids), 5000):  # keep IN lists bounded
        stmt = select(BurnoutReport.position_id, BurnoutReport.id).where(
            BurnoutReport.position_id.in_(ids[i : i + 5000]), BurnoutReport.status != CLOSED
        )
        for pid, rid in session.execute(stmt).all():
            out.setdefault(pid, []).append(rid)
    return out
