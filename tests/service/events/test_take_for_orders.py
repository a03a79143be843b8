"""Taking open burnout reports onto several new orders at once (the weekly run's bulk step)."""

from __future__ import annotations

from datetime import timedelta

import pytest
from sqlalchemy import select
from sqlalchemy.orm import Session

from service.api.errors import Conflict
from service.events import burnouts, reports
from service.events.models import BurnoutReport
from service.register.models import LampPosition
from tests import factories as fx


def _reports(db: Session, n: int) -> list[BurnoutReport]:
    s = fx.site(db)
    a = fx.area(db, s)
    fx.fixtures(db, a, fx.lamp_type(db), 2, lamps=2)
    db.commit()
    ps = list(db.scalars(select(LampPosition).order_by(LampPosition.id)))
    return [
        burnouts.report_burnout(db, position_id=p.id, reported_at=fx.T0 + timedelta(days=i + 1))
        for i, p in enumerate(ps[:n])
    ]


def test_each_report_goes_onto_its_own_order(db: Session) -> None:
    r1, r2, r3 = _reports(db, 3)
    before = {r.id: r.version for r in (r1, r2, r3)}
    reports.take_for_orders(db, {r1.id: 5, r2.id: 5, r3.id: 6}, at=fx.T0 + timedelta(days=9))
    # The loaded reports were expired: they show the row as the UPDATE left it.
    assert [(r.status, r.work_order_id) for r in (r1, r2, r3)] == [
        ("ordered", 5),
        ("ordered", 5),
        ("ordered", 6),
    ]
    assert all(r.version == before[r.id] + 1 for r in (r1, r2, r3))
    assert reports.open_burnout_reports(db) == []


def test_a_report_already_ordered_is_a_conflict(db: Session) -> None:
    r1, r2 = _reports(db, 2)
    reports.take_for_order(db, [r1.id], 5, at=fx.T0 + timedelta(days=9))
    with pytest.raises(Conflict) as err:
        reports.take_for_orders(db, {r1.id: 6, r2.id: 6}, at=fx.T0 + timedelta(days=9))
    assert "1 of these" in err.value.detail  # r1 stays on order 5; the caller rolls back
    assert db.get(BurnoutReport, r1.id).work_order_id == 5  # type: ignore[union-attr]


def test_more_reports_than_one_statement_takes(db: Session) -> None:
    """Chunks of 1,000: the CASE of each chunk maps only its own reports."""
    r1, r2, r3, r4 = _reports(db, 4)
    ids = [r.id for r in (r1, r2, r3, r4)]
    # 1,500 ids no report has (negative: they sort first) push the real ones to chunk two.
    wanted = {**{-1 - k: 7 for k in range(1_500)}, **{i: 8 + n for n, i in enumerate(ids)}}
    with pytest.raises(Conflict):
        reports.take_for_orders(db, wanted, at=fx.T0)
    db.expire_all()
    got = dict(db.execute(select(BurnoutReport.id, BurnoutReport.work_order_id)).all())
    assert [got[i] for i in ids] == [8, 9, 10, 11]
