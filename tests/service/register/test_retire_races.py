"""Two clients retiring the same fixture, or retiring it while the weekly run issues orders.

Threads released together by a barrier, each in its own session and committed transaction
on a database of the module's own; repeated REPEATS times on fresh records.
"""

from __future__ import annotations

from datetime import datetime
from functools import partial

from sqlalchemy import select
from sqlalchemy.orm import Session, sessionmaker

from service.api.errors import DomainError
from service.db.session import begin_write
from service.register.models import Fixture
from service.retirement import service as retire
from service.scheduling.runner import run_site_week
from service.workorders.models import WorkOrder, WorkOrderLine
from tests import races
from tests.factories import plan_area, plan_fixtures, plan_lamp_type, plan_site
from tests.races import all_at_once

# The race module's own committed database (a SQLite file, or a scratch PostgreSQL one).
race_engine = races.race_engine
factory = races.factory

REPEATS = 20


def _fixture(make: sessionmaker[Session], hours: float = 0.0) -> tuple[int, int]:
    """A committed site with one area of 3 fixtures; (site id, first fixture id)."""
    with make() as s:
        site = plan_site(s)
        lt = plan_lamp_type(s)
        area = plan_area(s, site)
        fx = plan_fixtures(s, area, lt, 3, hours_at_install=hours)
        s.commit()
        return site.id, fx[0].id


def _retire(make: sessionmaker[Session], fixture_id: int) -> datetime | None:
    with make() as s:
        begin_write(s)
        at = retire.retire_fixture(s, fixture_id).retired_at
        s.commit()
        return at


def test_two_retires_at_once_both_answer_the_same_record(
    factory: sessionmaker[Session],
) -> None:
    for _ in range(REPEATS):
        _, fid = _fixture(factory)
        got = all_at_once([partial(_retire, factory, fid), partial(_retire, factory, fid)])
        assert all(isinstance(g, datetime) for g in got), got
        assert got[0] == got[1]


def test_retire_against_weekly_run_never_leaves_a_retired_fixture_on_an_open_order(
    factory: sessionmaker[Session],
) -> None:
    for _ in range(REPEATS):
        site_id, fid = _fixture(factory, hours=20_000.0)  # overdue: the run issues a group order
        got = all_at_once(
            [partial(_retire, factory, fid), partial(run_site_week, factory, site_id)]
        )
        with factory() as s:
            fixture = s.get(Fixture, fid)
            assert fixture is not None
            on_open = s.scalars(
                select(WorkOrder.id)
                .join(WorkOrderLine)
                .where(WorkOrderLine.fixture_id == fid, WorkOrder.state == "issued")
            ).all()
        if isinstance(got[0], DomainError):
            assert got[0].status == 409 and on_open  # the run won: retiring waits for the order
            assert fixture.retired_at is None
        else:
            assert fixture.retired_at is not None and not on_open  # retired first: no work
