"""Two replicas catch up the same six due sites at once on PostgreSQL: each site's week runs
exactly once, the other replica skips a site it finds taken (SKIP LOCKED) or done."""

from __future__ import annotations

import threading
from datetime import UTC, datetime, timedelta

import pytest
from sqlalchemy import func, select
from sqlalchemy.orm import Session, sessionmaker

from service.db.session import make_engine
from service.register.models import Site
from service.scheduling.models import RunOutcome, RunWeek, WeeklyRun
from service.scheduling.runner import run_due_week
from service.scheduling.scheduler import WeeklyScheduler
from service.workorders.models import WorkOrder
from tests.factories import plan_area, plan_fixtures, plan_lamp_type, plan_site

SITES = 6


@pytest.mark.postgres_only
def test_two_replicas_catch_up_each_site_once(own_db_url: str) -> None:
    now = datetime.now(UTC)
    setup = make_engine(own_db_url)
    with Session(setup, expire_on_commit=False) as db:
        lt = plan_lamp_type(db)
        ids = []
        for _ in range(SITES):
            s = plan_site(db, created_at=now - timedelta(days=30))
            plan_fixtures(db, plan_area(db, s), lt, 2, hours_at_install=20_000.0)
            ids.append(s.id)
        db.commit()
    barrier = threading.Barrier(2)
    results: dict[str, list[WeeklyRun]] = {}
    errors: list[BaseException] = []

    def replica(name: str) -> None:
        engine = make_engine(own_db_url)  # a replica: its own engine and pool
        try:
            sched = WeeklyScheduler(sessionmaker(bind=engine, expire_on_commit=False))
            due = sched.missed(now)
            assert sorted(sid for sid, _ in due) == sorted(ids)
            barrier.wait(timeout=60)
            results[name] = sched.run_missed(now)
        except BaseException as exc:  # reported by the main thread
            errors.append(exc)
            barrier.abort()
        finally:
            engine.dispose()

    threads = [threading.Thread(target=replica, args=(n,)) for n in ("a", "b")]
    for t in threads:
        t.start()
    for t in threads:
        t.join(timeout=300)
    assert not errors, errors
    ran = results["a"] + results["b"]
    assert sorted(r.site_id for r in ran) == sorted(ids)  # each site by one replica only
    assert {r.outcome for r in ran} == {RunOutcome.SUCCEEDED}
    with Session(setup) as db:
        runs = db.execute(
            select(WeeklyRun.site_id, WeeklyRun.outcome, WeeklyRun.error).order_by(WeeklyRun.id)
        ).all()
        assert sorted(r.site_id for r in runs) == sorted(ids)  # no second, skipped record
        assert {(r.outcome, r.error) for r in runs} == {(RunOutcome.SUCCEEDED, None)}
        per_site = dict(
            db.execute(select(WorkOrder.site_id, func.count()).group_by(WorkOrder.site_id)).all()
        )
        assert per_site == dict.fromkeys(ids, 1)  # one group order per site, no duplicates
        claims = db.scalars(select(RunWeek.succeeded_at)).all()
        assert len(claims) == SITES and all(c is not None for c in claims)
    setup.dispose()
    # A replica starting later finds nothing left to do.
    late = make_engine(own_db_url)
    assert WeeklyScheduler(sessionmaker(bind=late, expire_on_commit=False)).run_missed(now) == []
    late.dispose()


@pytest.mark.postgres_only
def test_a_site_held_elsewhere_is_skipped_not_awaited(own_db_url: str) -> None:
    engine = make_engine(own_db_url)
    with Session(engine, expire_on_commit=False) as db:
        s = plan_site(db, created_at=datetime.now(UTC) - timedelta(days=30))
        db.commit()
    holder = Session(engine)  # another replica's run holds the site row
    holder.scalar(select(Site).where(Site.id == s.id).with_for_update(key_share=True))
    got: list[WeeklyRun | None] = []
    worker = threading.Thread(
        target=lambda: got.append(
            run_due_week(sessionmaker(bind=engine, expire_on_commit=False), s.id)
        )
    )
    worker.start()
    worker.join(timeout=60)  # waiting for the lock would outlast this: the holder never lets go
    try:
        assert not worker.is_alive() and got == [None]
    finally:
        holder.rollback()
        holder.close()
        worker.join()
    with Session(engine) as db:
        assert db.scalar(select(func.count()).select_from(WeeklyRun)) == 0
    ran = run_due_week(sessionmaker(bind=engine, expire_on_commit=False), s.id)
    assert ran is not None and ran.outcome == RunOutcome.SUCCEEDED  # free again: it runs
    engine.dispose()
