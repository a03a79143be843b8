"""Two clients importing the same fixture tags at once: one stores them, the other is a
clash (409), and the tags are stored once."""

from __future__ import annotations

import threading

import pytest
from sqlalchemy import Engine, func, select, text
from sqlalchemy.exc import IntegrityError
from sqlalchemy.orm import Session

from service.api.errors import Conflict
from service.register.fixture_bulk import FIXTURE_UPLOAD, import_fixtures
from service.register.models import Fixture
from service.uploads.parse import RawBody, read_upload
from tests import factories as fx


@pytest.mark.postgres_only
def test_same_tags_at_once(engine: Engine) -> None:
    with Session(engine) as setup:
        s = fx.site(setup, name="Race Import Site")
        fx.area(setup, s, name="Race Hall")
        lt = fx.lamp_type(setup, code="RACE-1")
        setup.commit()
        site_id, lt_id = s.id, lt.id
    body = "site,area,tag,lamp_type\n" + "".join(
        f"Race Import Site,Race Hall,R-{i},RACE-1\n" for i in range(300)
    )
    barrier = threading.Barrier(2)
    outcome: dict[int, str] = {}

    def run(k: int) -> None:
        with Session(engine) as session:
            session.execute(select(1))
            barrier.wait()  # both read the site's tags before either has committed
            try:
                cols = read_upload(RawBody(body.encode(), "text/csv"), FIXTURE_UPLOAD)
                import_fixtures(session, cols)
                session.commit()
                outcome[k] = "stored"
            except (Conflict, IntegrityError):
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
                select(func.count()).select_from(Fixture).where(Fixture.site_id == site_id)
            )
        assert n == 300
    finally:
        with Session(engine) as cleanup:
            cleanup.execute(text("DELETE FROM sites WHERE id = :i"), {"i": site_id})
            cleanup.execute(text("DELETE FROM lamp_types WHERE id = :i"), {"i": lt_id})
            cleanup.commit()
