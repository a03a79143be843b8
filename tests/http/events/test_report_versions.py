"""Burnout reports carry a version: ETag / If-None-Match on GET, bumped by every state change."""

from __future__ import annotations

from datetime import timedelta

import pytest
from fastapi.testclient import TestClient
from sqlalchemy import update
from sqlalchemy.orm import Session
from sqlalchemy.orm.exc import StaleDataError

from service.db.base import utcnow
from service.events import burnouts, reports
from service.events.models import BurnoutReport
from tests.factories import plan_area, plan_fixtures, plan_lamp_type, plan_site


def _report(db: Session) -> tuple[int, int]:
    """A committed open report on a fresh area; (report id, area id)."""
    s = plan_site(db)
    a = plan_area(db, s)
    fx = plan_fixtures(
        db, a, plan_lamp_type(db), 1, lamps=1, installed_at=utcnow() - timedelta(weeks=8)
    )
    report = burnouts.report_burnout(
        db, position_id=fx[0].positions[0].id, reported_at=utcnow() - timedelta(days=1)
    )
    db.commit()
    return report.id, a.id


def test_report_etag_follows_every_state_change(
    client: TestClient, db: Session, writer: dict[str, str]
) -> None:
    rid, area_id = _report(db)
    first = client.get(f"/api/v1/burnout-reports/{rid}", headers=writer)
    assert first.status_code == 200
    assert first.headers["etag"] == f'"{first.json()["version"]}"' == '"1"'
    again = client.get(f"/api/v1/burnout-reports/{rid}", headers={**writer, "If-None-Match": '"1"'})
    assert again.status_code == 304 and again.headers["etag"] == '"1"'

    # A spot order takes it in (open -> ordered): a new version, the old ETag is stale.
    order = client.post(
        "/api/v1/work-orders",
        json={"area_id": area_id, "kind": "spot_replacement"},
        headers=writer,
    )
    assert order.status_code == 201, order.text
    ordered = client.get(
        f"/api/v1/burnout-reports/{rid}", headers={**writer, "If-None-Match": '"1"'}
    )
    assert ordered.status_code == 200
    assert ordered.json()["status"] == "ordered" and ordered.json()["version"] == 2

    # Cancelling the order reopens it (ordered -> open): bumped again.
    cancel = client.post(f"/api/v1/work-orders/{order.json()['id']}/cancel", headers=writer)
    assert cancel.status_code == 200, cancel.text
    reopened = client.get(f"/api/v1/burnout-reports/{rid}", headers=writer).json()
    assert reopened["status"] == "open" and reopened["version"] == 3

    # Closing (the ORM path) bumps it too.
    reports.close_reports(db, [rid], None)
    db.commit()
    closed = client.get(f"/api/v1/burnout-reports/{rid}", headers=writer)
    assert closed.json()["status"] == "closed" and closed.json()["version"] == 4
    assert closed.headers["etag"] == '"4"'


def test_stale_report_update_is_refused(engine: object, db: Session) -> None:
    """Two sessions change one report: the one holding the older version loses."""
    rid, _ = _report(db)
    stale = db.get(BurnoutReport, rid)
    assert stale is not None and stale.version == 1
    # Another transaction moves the report on meanwhile (its UPDATE bumps the version).
    db.execute(
        update(BurnoutReport)
        .where(BurnoutReport.id == rid)
        .values(note="changed elsewhere", version=BurnoutReport.version + 1)
        .execution_options(synchronize_session=False)
    )
    with pytest.raises(StaleDataError):
        stale.note = "written from an old copy"
        db.flush()
    db.rollback()
