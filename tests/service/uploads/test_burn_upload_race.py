"""Two clients uploading the same day's burn hours for one fixture at once: the targets'
rows are locked before the overlap check, so one upload is stored and the other is a 409."""

from __future__ import annotations

import threading

import pytest
from sqlalchemy import Engine, func, select, text
from sqlalchemy.orm import Session

from service.api.errors import Conflict
from service.readings.burn_hours import BURN_UPLOAD, ingest_burn_hours
from service.readings.models import BurnHourRecord
from service.uploads.parse import RawBody, read_upload
from tests import factories as fx


@pytest.mark.postgres_only
def test_overlapping_uploads_at_once(engine: Engine) -> None:
    with Session(engine) as setup:
        s = fx.site(setup, name="Race Burn Site")
        a = fx.area(setup, s, name="Race Burn Hall")
        lt = fx.lamp_type(setup, code="RACE-BURN")
        fixtures = fx.fixtures(setup, a, lt, 3)
        setup.commit()
        site_id, lt_id, ids = s.id, lt.id, [f.id for f in fixtures]
    body = "fixture_id,day,hours\n" + "".join(f"{i},2025-01-02,8\n" for i in ids)
    barrier = threading.Barrier(2)
    outcome: dict[int, str] = {}

    def run(k: int) -> None:
        with Session(engine) as session:
            session.execute(select(1))
            barrier.wait()  # both start before either has stored anything
            try:
                ingest_burn_hours(
                    session, read_upload(RawBody(body.encode(), "text/csv"), BURN_UPLOAD)
                )
                session.commit()
                outcome[k] = "stored"
            except Conflict:
                session.rollback()
                outcome[k] = "clash"

    threads = [threading.Thread(target=run, args=(k,)) for k in (0, 1)]
    for t in threads:
        t.start()
    for t in threads:
        t.join()
    try:
        assert sorted(outcome.values()) == ["clash", "stored"]
        with Session(engine) as check:
            n = check.scalar(
                select(func.count())
                .select_from(BurnHourRecord)
                .where(BurnHourRecord.site_id == site_id)
            )
        assert n == 3
    finally:
        with Session(engine) as cleanup:
            cleanup.execute(
                text("DELETE FROM burn_hour_records WHERE site_id = :i"), {"i": site_id}
            )
            cleanup.execute(text("DELETE FROM sites WHERE id = :i"), {"i": site_id})
            cleanup.execute(text("DELETE FROM lamp_types WHERE id = :i"), {"i": lt_id})
            cleanup.commit()
