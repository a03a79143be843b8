"""Burnout reports and lamp removals: each lamp's end becomes one survival observation.

One observation per lamp: a burnout report writes the failure record (LampRemoval with
failed=True, reason "burnout") at the lamp's age when reported; the later replacement of
that dark lamp (record_removal) reuses that record instead of writing a second one.
Normalised hours = burn hours x acceleration factor, the acceleration factor being
1 / life factor (voltage x switching, service.reliability.fleet): rated-condition hours.
Services flush; the caller's transaction commits.
"""

from __future__ import annotations

from collections.abc import Sequence
from datetime import datetime, timedelta

import numpy as np
from sqlalchemy import select, update
from sqlalchemy.orm import Session

from service.api.errors import Conflict, Invalid
from service.db.base import utcnow
from service.db.crud import get_or_404
from service.events.models import REMOVAL_REASONS, BurnoutReport, LampRemoval
from service.forecasting.types import load_types
from service.readings.ages import position_ages
from service.register.models import Fixture, LampPosition
from service.reliability.fleet import evaluate_fleet

# Clock skew tolerated between a client and us before a timestamp counts as "in the future".
FUTURE_SKEW = timedelta(minutes=5)


def _aware(ts: datetime) -> datetime:
    return ts if ts.tzinfo is not None else ts.replace(tzinfo=utcnow().tzinfo)


def check_not_future(ts: datetime, field: str) -> None:
    """422 when a timestamp lies in the future."""
    if _aware(ts) > utcnow() + FUTURE_SKEW:
        raise Invalid(
            f"{field} {ts.isoformat()} is in the future.",
            errors=[{"field": field, "in": "body", "message": "must not be in the future"}],
        )


def _check_hours(burn_hours: float | None) -> None:
    if burn_hours is not None and not (np.isfinite(burn_hours) and burn_hours >= 0):
        raise Invalid(
            "burn_hours must be a non-negative number of hours.",
            errors=[{"field": "burn_hours", "in": "body", "message": "must be >= 0 hours"}],
        )


def _check_after_install(position: LampPosition, ts: datetime, field: str) -> None:
    if _aware(ts) < position.lamp_installed_at:
        raise Invalid(
            f"{field} {ts.isoformat()} is before the lamp went in "
            f"({position.lamp_installed_at.isoformat()}).",
            errors=[{"field": field, "in": "body", "message": "before the lamp went in"}],
        )


def _observe(
    session: Session,
    position: LampPosition,
    *,
    at: datetime,
    failed: bool,
    reason: str,
    work_order_id: int | None,
    burn_hours: float | None,
) -> LampRemoval:
    """Write the survival observation of the lamp now in a position, at time `at`."""
    ages = position_ages(session, position_ids=[position.id], at=at)
    types = load_types(session, ages.lamp_type_id, field_fit=False)
    res = evaluate_fleet(
        types.table,
        types.index(ages.lamp_type_id),
        ages.age_h,
        ages.voltage_v,
        ages.hours_per_start,
        0.0,
    )
    hours = float(ages.age_h[0]) if burn_hours is None else float(burn_hours)
    life_factor = float(res.life_factor[0])
    removal = LampRemoval(
        site_id=int(ages.site_id[0]),
        fixture_id=position.fixture_id,
        position_id=position.id,
        lamp_type_id=int(ages.lamp_type_id[0]),
        installed_at=position.lamp_installed_at,
        removed_at=at,
        burn_hours=hours,
        starts=float(ages.starts[0]),
        operating_voltage_v=float(ages.voltage_v[0]),
        normalised_hours=hours / life_factor,  # x acceleration factor 1 / life factor
        failed=failed,
        reason=reason,
        work_order_id=work_order_id,
        created_at=utcnow(),
    )
    session.add(removal)
    session.flush()
    return removal


def _reset(position: LampPosition, at: datetime) -> None:
    position.lamp_installed_at = at
    position.hours_at_install = 0.0
    position.starts_at_install = 0.0
    position.burned_out_at = None


def _failure_of_dark_lamp(session: Session, position: LampPosition) -> LampRemoval | None:
    """The failure record already written for the dark lamp in a position, if any."""
    rid = session.scalar(
        select(BurnoutReport.removal_id)
        .where(BurnoutReport.position_id == position.id, BurnoutReport.removal_id.is_not(None))
        .order_by(BurnoutReport.reported_at.desc(), BurnoutReport.id.desc())
        .limit(1)
    )
    removal = session.get(LampRemoval, rid) if rid is not None else None
    if removal is not None and removal.installed_at == position.lamp_installed_at:
        return removal
    return session.scalars(
        select(LampRemoval)
        .where(
            LampRemoval.position_id == position.id,
            LampRemoval.installed_at == position.lamp_installed_at,
            LampRemoval.failed.is_(True),
        )
        .order_by(LampRemoval.id.desc())
        .limit(1)
    ).first()


def record_removal(
    session: Session,
    position: LampPosition,
    *,
    removed_at: datetime,
    failed: bool,
    reason: str,
    work_order_id: int | None = None,
    burn_hours: float | None = None,
) -> LampRemoval:
    """Record a lamp taken out (failed or still burning) and restart the position at zero.

    A dark position (burnout already reported) keeps its one failure record: it is returned
    (with the work order attached) rather than a second one written, and its open reports
    are closed. The position restarts: lamp_installed_at = removed_at, zero hours and starts.
    """
    if reason not in REMOVAL_REASONS:
        raise Invalid(
            f"Unknown removal reason '{reason}'; use one of {', '.join(REMOVAL_REASONS)}.",
            errors=[{"field": "reason", "in": "body", "message": "unknown reason"}],
        )
    check_not_future(removed_at, "removed_at")
    _check_hours(burn_hours)
    if position.burned_out_at is not None:
        removal = _failure_of_dark_lamp(session, position)
        if removal is None:  # marked dark without a report: record the failure now
            removal = _observe(
                session,
                position,
                at=position.burned_out_at,
                failed=True,
                reason="burnout",
                work_order_id=work_order_id,
                burn_hours=burn_hours,
            )
        elif work_order_id is not None and removal.work_order_id is None:
            removal.work_order_id = work_order_id
        at = max(_aware(removed_at), position.burned_out_at)
        _close_open_for_positions(session, [position.id], work_order_id, at)
    else:
        _check_after_install(position, removed_at, "removed_at")
        at = _aware(removed_at)
        removal = _observe(
            session,
            position,
            at=at,
            failed=failed,
            reason=reason,
            work_order_id=work_order_id,
            burn_hours=burn_hours,
        )
    _reset(position, at)
    session.flush()
    return removal


def record_removals(
    session: Session,
    positions: Sequence[LampPosition],
    *,
    removed_at: datetime,
    failed: bool | Sequence[bool],
    reason: str,
    work_order_id: int | None = None,
) -> list[LampRemoval]:
    """record_removal for many positions at once (a group relamp): a few queries in all.

    Dark positions keep their one failure record, as in record_removal; the others get one
    observation each at their age at removed_at. Every position restarts at zero.
    """
    if reason not in REMOVAL_REASONS:
        raise Invalid(
            f"Unknown removal reason '{reason}'; use one of {', '.join(REMOVAL_REASONS)}.",
            errors=[{"field": "reason", "in": "body", "message": "unknown reason"}],
        )
    check_not_future(removed_at, "removed_at")
    at = _aware(removed_at)
    flags = [failed] * len(positions) if isinstance(failed, bool) else list(failed)
    if len(flags) != len(positions):
        raise ValueError("give one failed flag per position")
    out: list[LampRemoval] = []
    burning = [(p, f) for p, f in zip(positions, flags, strict=True) if p.burned_out_at is None]
    for p, f in zip(positions, flags, strict=True):
        if p.burned_out_at is not None:
            out.append(
                record_removal(
                    session, p, removed_at=at, failed=f, reason=reason, work_order_id=work_order_id
                )
            )
    for p, _ in burning:
        _check_after_install(p, at, "removed_at")
    for lo in range(0, len(burning), 5000):
        part = burning[lo : lo + 5000]
        by_id = {p.id: (p, f) for p, f in part}
        ages = position_ages(session, position_ids=list(by_id), at=at)
        types = load_types(session, ages.lamp_type_id, field_fit=False)
        res = evaluate_fleet(
            types.table,
            types.index(ages.lamp_type_id),
            ages.age_h,
            ages.voltage_v,
            ages.hours_per_start,
            0.0,
        )
        rows = []
        for i in range(ages.size):
            p, f = by_id[int(ages.position_id[i])]
            hours = float(ages.age_h[i])
            rows.append(
                LampRemoval(
                    site_id=int(ages.site_id[i]),
                    fixture_id=p.fixture_id,
                    position_id=p.id,
                    lamp_type_id=int(ages.lamp_type_id[i]),
                    installed_at=p.lamp_installed_at,
                    removed_at=at,
                    burn_hours=hours,
                    starts=float(ages.starts[i]),
                    operating_voltage_v=float(ages.voltage_v[i]),
                    normalised_hours=hours / float(res.life_factor[i]),
                    failed=bool(f),
                    reason=reason,
                    work_order_id=work_order_id,
                    created_at=utcnow(),
                )
            )
            _reset(p, at)
        session.add_all(rows)
        out.extend(rows)
    session.flush()
    return out


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
    _check_hours(burn_hours)
    _check_after_install(position, reported_at, "reported_at")
    if position.burned_out_at is not None:
        open_id = session.scalar(
            select(BurnoutReport.id).where(
                BurnoutReport.position_id == position.id, BurnoutReport.status != "closed"
            )
        )
        raise Conflict(
            f"Lamp position {position.id} is already reported dark since "
            f"{position.burned_out_at.isoformat()}; record its replacement instead.",
            report_id=open_id,
        )
    fixture = session.get(Fixture, position.fixture_id)
    assert fixture is not None  # a position always belongs to a fixture (FK)
    at = _aware(reported_at)
    removal = _observe(
        session,
        position,
        at=at,
        failed=True,
        reason="burnout",
        work_order_id=None,
        burn_hours=burn_hours,
    )
    report = BurnoutReport(
        site_id=fixture.site_id,
        area_id=fixture.area_id,
        fixture_id=fixture.id,
        position_id=position.id,
        reported_at=at,
        burn_hours=burn_hours,
        status="open",
        note=note,
        removal_id=removal.id,
    )
    session.add(report)
    position.burned_out_at = at
    if replaced:
        report.status = "closed"
        report.closed_at = at
        _reset(position, at)
    session.flush()
    return report


def open_burnout_reports(
    session: Session, *, site_id: int | None = None, area_id: int | None = None
) -> list[BurnoutReport]:
    """Reports still "open" (dark lamps no work order has taken in), oldest first."""
    stmt = select(BurnoutReport).where(BurnoutReport.status == "open")
    if site_id is not None:
        stmt = stmt.where(BurnoutReport.site_id == site_id)
    if area_id is not None:
        stmt = stmt.where(BurnoutReport.area_id == area_id)
    return list(session.scalars(stmt.order_by(BurnoutReport.reported_at, BurnoutReport.id)))


def mark_ordered(
    session: Session, report_ids: Sequence[int], work_order_id: int
) -> list[BurnoutReport]:
    """Attach open reports to a spot work order (status "ordered"; still dark)."""
    reports = list(
        session.scalars(
            select(BurnoutReport).where(
                BurnoutReport.id.in_(list(report_ids)), BurnoutReport.status == "open"
            )
        )
    )
    for r in reports:
        r.status = "ordered"
        r.work_order_id = work_order_id
    session.flush()
    return reports


def reopen_reports(session: Session, work_order_id: int) -> int:
    """Return a cancelled order's "ordered" reports to "open"; how many."""
    result = session.execute(
        update(BurnoutReport)
        .where(BurnoutReport.work_order_id == work_order_id, BurnoutReport.status == "ordered")
        .values(status="open", work_order_id=None)
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
                BurnoutReport.id.in_(list(report_ids)), BurnoutReport.status != "closed"
            )
        )
    )
    when = utcnow() if closed_at is None else _aware(closed_at)
    for r in reports:
        r.status = "closed"
        r.closed_at = when
        if work_order_id is not None:
            r.work_order_id = work_order_id
    session.flush()
    return reports


def _close_open_for_positions(
    session: Session, position_ids: Sequence[int], work_order_id: int | None, at: datetime
) -> None:
    ids = session.scalars(
        select(BurnoutReport.id).where(
            BurnoutReport.position_id.in_(list(position_ids)), BurnoutReport.status != "closed"
        )
    ).all()
    close_reports(session, list(ids), work_order_id, closed_at=at)
