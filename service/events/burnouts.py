"""Burnout reports: a lamp reported dark gets its one failure record at its age then.

The report stays "open" until a spot work order or the replacement (service.events.
removals.record_removal) closes it; the report's states and transitions are in
service.events.reports. Services flush; the caller's transaction commits.
"""

from __future__ import annotations

from datetime import datetime

from sqlalchemy import select
from sqlalchemy.orm import Session

from service.api.errors import Conflict
from service.db.crud import get_or_404
from service.events import reports
from service.events.checks import (
    as_aware,
    check_after_install,
    check_burn_hours,
    check_not_future,
)
from service.events.models import BurnoutReport, BurnoutReportState
from service.events.removals import observe, restart_position
from service.register.history import refuse_retired
from service.register.models import Fixture, LampPosition


def report_burnout(
    session: Session,
    *,
    position_id: int,
    reported_at: datetime,
    burn_hours: float | None = None,
    note: str | None = None,
    replaced: bool = False,
) -> BurnoutReport:
    """Report a lamp dark: one failure record at its age; optionally replaced at once.

    Without replaced the position stays dark and the report "open" until a spot work order
    or a replacement (record_removal) closes it; with replaced a new lamp goes in at
    reported_at and the report is closed.
    """
    position = get_or_404(session, LampPosition, position_id, "lamp position")
    check_not_future(reported_at, "reported_at")
    check_burn_hours(burn_hours)
    check_after_install(position, reported_at, "reported_at")
    if position.burned_out_at is not None:
        open_id = session.scalar(
            select(BurnoutReport.id).where(
                BurnoutReport.position_id == position.id,
                BurnoutReport.status != BurnoutReportState.CLOSED,
            )
        )
        raise Conflict(
            f"Lamp position {position.id} is already reported dark since "
            f"{position.burned_out_at.isoformat()}; record its replacement instead.",
            report_id=open_id,
        )
    fixture = session.get(Fixture, position.fixture_id)
    assert fixture is not None  # a position always belongs to a fixture (FK)
    refuse_retired("fixture", "fixture_id", fixture)
    at = as_aware(reported_at)
    removal = observe(
        session,
        position,
        at=at,
        failed=True,
        reason="burnout",
        work_order_id=None,
        burn_hours=burn_hours,
    )
    report = reports.new_report(
        session,
        site_id=fixture.site_id,
        area_id=fixture.area_id,
        fixture_id=fixture.id,
        position_id=position.id,
        reported_at=at,
        burn_hours=burn_hours,
        note=note,
        removal_id=removal.id,
        replaced=replaced,
    )
    position.burned_out_at = at
    if replaced:
        restart_position(position, at)
    session.flush()
    return report
