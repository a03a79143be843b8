"""Adapter to the events service: record removed lamps and close burnout reports.

Uses service.events.service (record_removal, close_reports) when present. Until then a
small local fallback records the LampRemoval from the planning position arrays and resets
the position, so completion works on the register alone.
"""

from __future__ import annotations

import importlib
from collections.abc import Sequence
from datetime import datetime
from typing import Any

from sqlalchemy import select, update
from sqlalchemy.orm import Session

from service.events.models import BurnoutReport, LampRemoval
from service.planning.positions import load_positions
from service.register.models import Fixture, LampPosition


def _events() -> Any | None:
    try:
        mod = importlib.import_module("service.events.service")
    except ModuleNotFoundError:
        return None
    return mod if hasattr(mod, "record_removal") and hasattr(mod, "close_reports") else None


def record_removal(
    session: Session,
    position: LampPosition,
    *,
    removed_at: datetime,
    failed: bool,
    reason: str,
    work_order_id: int | None,
) -> Any:
    """Record a removed lamp (failed or censored) and start the position at zero hours."""
    ev = _events()
    if ev is not None:
        return ev.record_removal(
            session,
            position,
            removed_at=removed_at,
            failed=failed,
            reason=reason,
            work_order_id=work_order_id,
        )
    fixture = session.get(Fixture, position.fixture_id)
    assert fixture is not None
    pos = load_positions(session, area_id=fixture.area_id, at=removed_at)
    hit = (pos.position_id == position.id).nonzero()[0]
    hours = float(pos.age_h[hit[0]]) if hit.size else 0.0
    starts = float(pos.starts[hit[0]]) if hit.size else None
    volts = float(pos.voltage_v[hit[0]]) if hit.size else None
    row = LampRemoval(
        site_id=fixture.site_id,
        fixture_id=fixture.id,
        position_id=position.id,
        lamp_type_id=fixture.lamp_type_id,
        installed_at=position.lamp_installed_at,
        removed_at=removed_at,
        burn_hours=hours,
        starts=starts,
        operating_voltage_v=volts,
        normalised_hours=hours,  # fallback: no acceleration factor without the events service
        failed=failed,
        reason=reason,
        work_order_id=work_order_id,
        created_at=removed_at,
    )
    session.add(row)
    position.lamp_installed_at = removed_at
    position.hours_at_install = 0.0
    position.starts_at_install = 0.0
    position.burned_out_at = None
    session.flush()
    return row


def close_reports(session: Session, report_ids: Sequence[int], work_order_id: int) -> None:
    """Close burnout reports answered by a completed order."""
    if not report_ids:
        return
    ev = _events()
    if ev is not None:
        ev.close_reports(session, list(report_ids), work_order_id)
        return
    session.execute(
        update(BurnoutReport)
        .where(BurnoutReport.id.in_(list(report_ids)))
        .values(status="closed", work_order_id=work_order_id)
    )


def release_reports(session: Session, work_order_id: int, report_ids: Sequence[int] | None) -> int:
    """Send an order's batched reports (all, or the ids given) back to open."""
    stmt = (
        update(BurnoutReport)
        .where(BurnoutReport.work_order_id == work_order_id, BurnoutReport.status == "ordered")
        .values(status="open", work_order_id=None)
    )
    if report_ids is not None:
        stmt = stmt.where(BurnoutReport.id.in_(list(report_ids)))
    return int(session.execute(stmt).rowcount or 0)  # type: ignore[attr-defined]


def reports_on_positions(session: Session, position_ids: Sequence[int]) -> dict[int, list[int]]:
    """Reports not yet closed, per position (a group relamp answers them too)."""
    out: dict[int, list[int]] = {}
    if not position_ids:
        return out
    stmt = select(BurnoutReport.position_id, BurnoutReport.id).where(
        BurnoutReport.position_id.in_(list(position_ids)),
        BurnoutReport.status.in_(("open", "ordered")),
    )
    for pid, rid in session.execute(stmt).all():
        out.setdefault(pid, []).append(rid)
    return out
