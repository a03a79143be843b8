"""The events service calls a completed or cancelled order makes, plus a bulk report lookup.

record_removals (service.events.service, record_removal for many positions in a few
queries) writes one survival observation per removed lamp (failed or censored), reuses the
failure record a burnout report already wrote for a dark lamp, closes that position's
reports, and restarts the position at zero hours.
"""

from __future__ import annotations

from collections.abc import Sequence

from sqlalchemy import select
from sqlalchemy.orm import Session

from service.events import reports
from service.events import service as events
from service.events.models import BurnoutReport

record_removals = events.record_removals
close_reports = reports.close_reports


def release_reports(session: Session, work_order_id: int) -> int:
    """Send an order's reports still "ordered" back to "open" (for the next spot order)."""
    return reports.reopen_reports(session, work_order_id)


def reports_on_positions(session: Session, position_ids: Sequence[int]) -> dict[int, list[int]]:
    """Reports not yet closed, per position (a group relamp answers them too)."""
    out: dict[int, list[int]] = {}
    ids = list(position_ids)
    for i in range(0, len(ids), 5000):  # keep IN lists bounded
        stmt = select(BurnoutReport.position_id, BurnoutReport.id).where(
            BurnoutReport.position_id.in_(ids[i : i + 5000]),
            BurnoutReport.status.in_(("open", "ordered")),
        )
        for pid, rid in session.execute(stmt).all():
            out.setdefault(pid, []).append(rid)
    return out
