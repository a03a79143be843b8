"""Completion per lamp position: found dark is a failure, one lamp of a fixture can stay."""

from __future__ import annotations

from datetime import timedelta
from typing import Any

import pytest
from sqlalchemy import func, select
from sqlalchemy.orm import Session

from service.api.errors import Conflict, Invalid
from service.db.base import utcnow
from service.events.models import LampRemoval
from service.register.models import LampPosition
from service.workorders import service as orders
from service.workorders.models import WorkOrder, WorkOrderKind
from service.workorders.schemas import CompleteBody, WorkOrderCreate
from tests.factories import plan_area, plan_fixtures, plan_lamp_type, plan_site


def _started_group(db: Session) -> tuple[WorkOrder, list[Any]]:
    s = plan_site(db)
    lt = plan_lamp_type(db)
    a = plan_area(db, s)
    fx = plan_fixtures(db, a, lt, 3, lamps=2, installed_at=utcnow() - timedelta(weeks=20))
    db.commit()
    o = orders.create(db, WorkOrderCreate(area_id=a.id, kind=WorkOrderKind.GROUP_RELAMP))
    orders.issue(db, o.id)
    orders.start(db, o.id)
    db.commit()
    return o, fx


def _mixed(fx: list[Any]) -> CompleteBody:
    p0, p1 = fx[0].positions
    return CompleteBody.model_validate(
        {
            "positions": [
                {"position_id": p0.id, "outcome": "found_dark"},
                {"position_id": p1.id, "outcome": "skipped", "reason": "socket damaged"},
            ],
            "others": "replaced",
        }
    )


def test_found_dark_is_a_failure_and_one_lamp_can_be_skipped(db: Session) -> None:
    order, fx = _started_group(db)
    p0, p1 = fx[0].positions
    p1_installed = p1.lamp_installed_at
    orders.complete(db, order.id, _mixed(fx))
    db.commit()
    db.expire_all()
    got = {
        r.position_id: r
        for r in db.scalars(select(LampRemoval).where(LampRemoval.work_order_id == order.id))
    }
    # Found dark without a prior report: a failure (reason burnout), not a censored lamp.
    assert got[p0.id].failed and got[p0.id].reason == "burnout"
    assert got[p0.id].burn_hours > 0  # at its age, not at zero
    assert p1.id not in got  # skipped: no removal
    assert db.get(LampPosition, p1.id).lamp_installed_at == p1_installed  # type: ignore[union-attr]
    others = [p.id for f in fx[1:] for p in f.positions]
    assert all(not got[pid].failed and got[pid].reason == "group_relamp" for pid in others)
    line = next(ln for ln in order.lines if ln.fixture_id == fx[0].id)
    assert line.outcome == "partial" and line.skip_reason == "socket damaged"
    assert line.position_outcomes == [
        {"position_id": p0.id, "outcome": "found_dark", "reason": None},
        {"position_id": p1.id, "outcome": "skipped", "reason": "socket damaged"},
    ]
    assert all(ln.outcome == "replaced" for ln in order.lines if ln.fixture_id != fx[0].id)


def test_repeat_is_compared_per_position(db: Session) -> None:
    order, fx = _started_group(db)
    orders.complete(db, order.id, _mixed(fx))
    db.commit()
    n = db.scalar(select(func.count()).select_from(LampRemoval))
    assert orders.complete(db, order.id, _mixed(fx)).state == "done"  # a retry: unchanged
    with pytest.raises(Conflict):  # the per-fixture form says something else
        orders.complete(db, order.id, CompleteBody(others="replaced"))
    db.rollback()
    assert db.scalar(select(func.count()).select_from(LampRemoval)) == n


def test_per_fixture_and_per_position_forms_match_on_retry(db: Session) -> None:
    order, fx = _started_group(db)
    orders.complete(db, order.id, CompleteBody(others="replaced"))
    db.commit()
    every = [{"position_id": p.id, "outcome": "replaced"} for f in fx for p in f.positions]
    same = CompleteBody.model_validate({"positions": every})  # no 'others' needed: all listed
    assert orders.complete(db, order.id, same).state == "done"


def test_bad_positions_are_refused_by_field(db: Session) -> None:
    order, fx = _started_group(db)
    p0 = fx[0].positions[0]
    cases = [
        (
            {"positions": [{"position_id": 999_999, "outcome": "replaced"}], "others": "replaced"},
            "positions.0.position_id",
        ),
        (
            {
                "positions": [
                    {"position_id": p0.id, "outcome": "replaced"},
                    {"position_id": p0.id, "outcome": "found_dark"},
                ],
                "others": "replaced",
            },
            "positions.1.position_id",
        ),
        ({"positions": [{"position_id": p0.id, "outcome": "replaced"}]}, "outcomes"),
    ]
    for body, field in cases:
        with pytest.raises(Invalid) as exc:
            orders.complete(db, order.id, CompleteBody.model_validate(body))
        assert any(e["field"] == field for e in exc.value.errors or []), exc.value.errors
        db.rollback()
    assert db.get(WorkOrder, order.id).state == "in_progress"  # type: ignore[union-attr]
    assert db.scalar(select(func.count()).select_from(LampRemoval)) == 0


def test_found_dark_is_interval_censored_since_the_last_visit(db: Session) -> None:
    # Meeker & Escobar, interval censoring: a lamp found dark without a report failed between
    # the last time it was known burning and the visit; with no earlier order in the area the
    # lower bound is the lamp's install (0 h here); lamps found burning carry no interval.
    order, fx = _started_group(db)
    p0, _p1 = fx[0].positions
    orders.complete(db, order.id, _mixed(fx))
    db.commit()
    got = {
        r.position_id: r
        for r in db.scalars(select(LampRemoval).where(LampRemoval.work_order_id == order.id))
    }
    # (to the stored timestamps' precision: the install is the lower bound)
    assert got[p0.id].failed_after_normalised_hours == pytest.approx(0.0, abs=1e-6)
    assert got[p0.id].normalised_hours > 0.0
    assert all(r.failed_after_normalised_hours is None for pid, r in got.items() if pid != p0.id)


def test_found_dark_lower_bound_is_the_age_at_the_last_visit(db: Session) -> None:
    # The lower bound is the normalised age at the given moment: 10 of 20 weeks on a constant
    # schedule at nominal voltage is half the age at the visit (hand computation).
    from service.events import removals as events

    _order, fx = _started_group(db)
    p = fx[1].positions[0]
    now = utcnow()
    (row,) = events.record_removals(
        db,
        [p],
        removed_at=now,
        failed=True,
        reason="burnout",
        found_dark_since={p.id: now - timedelta(weeks=10)},
    )
    assert row.failed_after_normalised_hours == pytest.approx(row.normalised_hours / 2, rel=1e-3)
