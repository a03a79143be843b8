"""History that blocks a hard delete: counts of rows a cascade would drop."""

from __future__ import annotations

from collections.abc import Callable
from typing import Any

from sqlalchemy import ColumnElement, Select, func, or_, select
from sqlalchemy.exc import IntegrityError
from sqlalchemy.orm import Session

from service.api.errors import Conflict
from service.events.models import BurnoutReport, LampRemoval
from service.readings.models import BurnHourRecord, VoltageReading
from service.register.models import Area, Fixture
from service.scheduling.models import WeeklyRun
from service.workorders.models import WorkOrder, WorkOrderLine


def _count(session: Session, model: type, where: ColumnElement[bool]) -> int:
    """Rows of one table matching a condition."""
    return int(session.scalar(select(func.count()).select_from(model).where(where)) or 0)


def history_counts(
    session: Session,
    fixtures: Select[int],
    areas: Select[int] | None,
    site_id: int | None = None,
) -> dict[str, int]:
    """Counts of history rows under the given fixtures, areas and site (non-zero only)."""
    area_cond = BurnHourRecord.area_id.in_(areas) if areas is not None else None
    volt_area = VoltageReading.area_id.in_(areas) if areas is not None else None
    counts = {
        "removals": _count(session, LampRemoval, LampRemoval.fixture_id.in_(fixtures)),
        "burn-hour records": _count(
            session,
            BurnHourRecord,
            or_(
                BurnHourRecord.fixture_id.in_(fixtures),
                *([area_cond] if area_cond is not None else []),
            ),
        ),
        "voltage readings": _count(
            session,
            VoltageReading,
            VoltageReading.site_id == site_id
            if site_id is not None
            else or_(
                VoltageReading.fixture_id.in_(fixtures),
                *([volt_area] if volt_area is not None else []),
            ),
        ),
        "burnout reports": _count(session, BurnoutReport, BurnoutReport.fixture_id.in_(fixtures)),
        "work-order lines": _count(session, WorkOrderLine, WorkOrderLine.fixture_id.in_(fixtures)),
        "work orders": _count(session, WorkOrder, WorkOrder.area_id.in_(areas))
        if areas is not None
        else 0,
        "weekly runs": _count(session, WeeklyRun, WeeklyRun.site_id == site_id)
        if site_id is not None
        else 0,
    }
    return {k: v for k, v in counts.items() if v}


def refuse_if_history(what: str, counts: dict[str, int]) -> None:
    """Raise 409 naming the history that blocks a hard delete."""
    if counts:
        listed = ", ".join(f"{n} {name}" for name, n in counts.items())
        raise Conflict(
            f"{what} has history ({listed}); deleting it would lose that history.",
            blocking=counts,
        )


def delete_without_history(session: Session, what: str, row: object) -> None:
    """Hard-delete a row whose history was checked; a RESTRICT hit (history added meanwhile) is 409."""
    try:
        with session.begin_nested():  # a savepoint, so the request can still answer
            session.delete(row)
            session.flush()
    except IntegrityError:
        raise Conflict(
            f"{what} gained history while being deleted; nothing was deleted. Retire it instead.",
        ) from None


def delete_checked(
    session: Session, row: Any, what: str, check: Callable[[Session, int], None]
) -> None:
    """Hard-delete a row once `check` finds no history (409 naming the history otherwise)."""
    check(session, row.id)
    delete_without_history(session, what, row)


def check_positions(session: Session, position_ids: list[int]) -> None:
    """409 if lamp positions about to be dropped have removals or burnout reports."""
    if not position_ids:
        return
    counts = {
        "removals": _count(session, LampRemoval, LampRemoval.position_id.in_(position_ids)),
        "burnout reports": _count(
            session, BurnoutReport, BurnoutReport.position_id.in_(position_ids)
        ),
    }
    refuse_if_history("A lamp position to drop", {k: v for k, v in counts.items() if v})


def check_site(session: Session, site_id: int) -> None:
    """409 if the site has any history."""
    fx = select(Fixture.id).where(Fixture.site_id == site_id)
    ar = select(Area.id).where(Area.site_id == site_id)
    refuse_if_history("The site", history_counts(session, fx, ar, site_id))


def check_area(session: Session, area_id: int) -> None:
    """409 if the area has any history."""
    fx = select(Fixture.id).where(Fixture.area_id == area_id)
    ar = select(Area.id).where(Area.id == area_id)
    refuse_if_history("The area", history_counts(session, fx, ar))


def check_fixture(session: Session, fixture_id: int) -> None:
    """409 if the fixture has any history."""
    fx = select(Fixture.id).where(Fixture.id == fixture_id)
    refuse_if_history("The fixture", history_counts(session, fx, None))


def refuse_retired(label: str, field: str, record: Any) -> None:
    """409 when something new would be added under (or on) a retired record."""
    if record.retired_at is not None:
        raise Conflict(
            f"{field} {record.id}: the {label} is retired; nothing new can be added to it.",
            field=field,
            retired_at=record.retired_at.isoformat(),
        )
