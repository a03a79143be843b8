"""Lamp removals: each lamp's end becomes one survival observation (LampRemoval).

One observation per lamp: a burnout report (service.events.burnouts) writes the failure
record (failed=True, reason "burnout") at the lamp's age when reported; the later
replacement of that dark lamp (record_removal) reuses that record instead of writing a
second one.
Normalised hours = rated-condition hours: the lamp's wear accumulated over its supply
history (service.reliability.exposure, sum of dt / life factor), not the hours at the mean
voltage.
Services flush; the caller's transaction commits.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from datetime import datetime

from sqlalchemy import select
from sqlalchemy.orm import Session

from service.catalogue.resolved import load_types
from service.db.base import utcnow
from service.events.checks import (
    as_aware,
    check_after_install,
    check_burn_hours,
    check_not_future,
    check_reason,
)
from service.events.models import BurnoutReport, LampRemoval
from service.events.reports import close_open_for_positions
from service.readings.ages import position_ages
from service.register.models import LampPosition
from service.reliability.fleet import FleetResult, FloatArray, evaluate_fleet

# Positions evaluated per query batch in record_removals.
_BATCH = 5000


def _observations(
    session: Session,
    positions: dict[int, tuple[LampPosition, bool]],
    *,
    at: datetime,
    reason: str,
    work_order_id: int | None,
    burn_hours: float | None = None,
) -> list[LampRemoval]:
    """Survival observations (unsaved) of the lamps now in some positions, at time `at`.

    positions maps position id to (position, failed). burn_hours, when given, replaces the
    computed age (one position only: a reported figure).
    """
    ages = position_ages(session, position_ids=list(positions), at=at)
    # Each lamp's voltage response on the ballast its fixture runs on (catalogue.resolved).
    types = load_types(session, ages.lamp_type_id, ballast_kinds=ages.ballast_kind)
    res = evaluate_fleet(
        types.table,
        types.index(ages.lamp_type_id, ages.ballast_kind),
        ages.age_h,
        ages.voltage_v,
        ages.hours_per_start,
        0.0,
        history=ages.history,
    )
    rows = []
    for i in range(ages.size):
        p, failed = positions[int(ages.position_id[i])]
        hours = float(ages.age_h[i]) if burn_hours is None else float(burn_hours)
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
                # x acceleration factor 1 / life factor
                # accumulated exposure (a reported figure scaled by the same ratio)
                normalised_hours=hours * _rated_per_hour(res, ages.age_h, i),
                failed=bool(failed),
                reason=reason,
                work_order_id=work_order_id,
                created_at=utcnow(),
            )
        )
    return rows


def _rated_per_hour(res: FleetResult, age_h: FloatArray, i: int) -> float:
    """Rated-condition hours per burn hour of row i: exposure / age (1 / life factor at 0)."""
    age = float(age_h[i])
    if age > 0:
        return float(res.rated_age_h[i]) / age
    return 1.0 / float(res.life_factor[i])


def observe(
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
    (removal,) = _observations(
        session,
        {position.id: (position, failed)},
        at=at,
        reason=reason,
        work_order_id=work_order_id,
        burn_hours=burn_hours,
    )
    session.add(removal)
    session.flush()
    return removal


def restart_position(position: LampPosition, at: datetime) -> None:
    """A new lamp in the position at `at`: zero burn hours and starts, not dark."""
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
    check_reason(reason)
    check_not_future(removed_at, "removed_at")
    check_burn_hours(burn_hours)
    if position.burned_out_at is not None:
        removal = _failure_of_dark_lamp(session, position)
        if removal is None:  # marked dark without a report: record the failure now
            removal = observe(
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
        at = max(as_aware(removed_at), position.burned_out_at)
        close_open_for_positions(session, [position.id], work_order_id, at)
    else:
        check_after_install(position, removed_at, "removed_at")
        at = as_aware(removed_at)
        removal = observe(
            session,
            position,
            at=at,
            failed=failed,
            reason=reason,
            work_order_id=work_order_id,
            burn_hours=burn_hours,
        )
    restart_position(position, at)
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
    found_dark_since: Mapping[int, datetime] | None = None,
) -> list[LampRemoval]:
    """record_removal for many positions at once (a group relamp): a few queries in all.

    Dark positions keep their one failure record, as in record_removal; the others get one
    observation each at their age at removed_at. Every position restarts at zero.
    found_dark_since maps positions found dark without a report to the last time they were
    known burning: their failure is interval-censored, failed after the normalised age then
    (failed_after_normalised_hours) and by the age at removed_at.
    """
    check_reason(reason)
    check_not_future(removed_at, "removed_at")
    at = as_aware(removed_at)
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
        check_after_install(p, at, "removed_at")
    for lo in range(0, len(burning), _BATCH):
        by_id = {p.id: (p, f) for p, f in burning[lo : lo + _BATCH]}
        rows = _observations(session, by_id, at=at, reason=reason, work_order_id=work_order_id)
        _interval_bounds(session, rows, found_dark_since or {})
        for removal in rows:
            restart_position(by_id[removal.position_id][0], at)
        session.add_all(rows)
        out.extend(rows)
    session.flush()
    return out


def _interval_bounds(
    session: Session, rows: list[LampRemoval], since: Mapping[int, datetime]
) -> None:
    """Set the lower bound of each found-dark failure: its normalised age when last seen lit."""
    by_time: dict[datetime, list[LampRemoval]] = {}
    for r in rows:
        if r.failed and r.position_id in since:
            by_time.setdefault(as_aware(since[r.position_id]), []).append(r)
    for t, group in by_time.items():  # one query batch per distinct last visit
        positions = session.scalars(
            select(LampPosition).where(LampPosition.id.in_([r.position_id for r in group]))
        ).all()
        lows = _observations(
            session,
            {p.id: (p, True) for p in positions},
            at=min(t, as_aware(group[0].removed_at)),
            reason="burnout",
            work_order_id=None,
        )
        low_of = {lo.position_id: lo.normalised_hours for lo in lows}
        for r in group:
            r.failed_after_normalised_hours = min(low_of[r.position_id], r.normalised_hours)
