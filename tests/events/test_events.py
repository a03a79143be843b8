"""Burnout reports and lamp removals: one observation per lamp, resets, normalised hours."""

from __future__ import annotations

from datetime import timedelta

import pytest
from fastapi.testclient import TestClient
from sqlalchemy import select
from sqlalchemy.orm import Session

from service.events import burnouts, reports
from service.events.models import LampRemoval
from service.events.removals import record_removal, record_removals
from service.register.models import LampPosition
from tests.readings import factory as fx

T0 = fx.T0


def _positions(db: Session, n_fixtures: int = 2, **fixture_over: object) -> list[LampPosition]:
    s = fx.site(db)
    a = fx.area(db, s)  # 84 burn hours per week, 12 h per start
    lt = fx.lamp_type(db)
    fx.fixtures(db, a, lt, n_fixtures, **fixture_over)  # type: ignore[arg-type]
    db.commit()
    return list(db.scalars(select(LampPosition).order_by(LampPosition.id)))


def test_burnout_then_replacement_counts_one_failure(
    db: Session, client: TestClient, writer: dict[str, str]
) -> None:
    pos = _positions(db)[0]
    when = T0 + timedelta(days=10)  # 120 burn hours by schedule
    r = client.post(
        "/api/v1/burnout-reports",
        json={"position_id": pos.id, "reported_at": when.isoformat()},
        headers=writer,
    )
    assert r.status_code == 201, r.text
    report = r.json()
    assert report["status"] == "open" and report["removal_id"] is not None
    db.refresh(pos)
    assert pos.burned_out_at == when
    assert [x.id for x in reports.open_burnout_reports(db, area_id=report["area_id"])] == [
        report["id"]
    ]
    # A second report of the same dark lamp is refused.
    again = client.post(
        "/api/v1/burnout-reports",
        json={"position_id": pos.id, "reported_at": when.isoformat()},
        headers=writer,
    )
    assert again.status_code == 409
    # Replacing it two days later reuses the failure record: no second observation.
    r = client.post(
        "/api/v1/lamp-removals",
        json={
            "position_id": pos.id,
            "removed_at": (when + timedelta(days=2)).isoformat(),
            "failed": True,
            "reason": "spot_relamp",
            "work_order_id": 77,
        },
        headers=writer,
    )
    assert r.status_code == 201, r.text
    removal = r.json()
    assert removal["id"] == report["removal_id"]
    assert removal["burn_hours"] == pytest.approx(120.0)  # dark lamps age no more
    assert removal["work_order_id"] == 77
    assert (
        db.scalar(select(LampRemoval.id).where(LampRemoval.position_id == pos.id)) == removal["id"]
    )
    assert len(db.scalars(select(LampRemoval)).all()) == 1
    db.refresh(pos)
    assert pos.burned_out_at is None and pos.hours_at_install == 0.0
    assert pos.lamp_installed_at == when + timedelta(days=2)
    got = client.get(f"/api/v1/burnout-reports/{report['id']}", headers=writer).json()
    assert got["status"] == "closed" and got["work_order_id"] == 77


def test_report_with_replacement_closes_at_once(db: Session) -> None:
    pos = _positions(db)[1]
    when = T0 + timedelta(days=3)
    rep = burnouts.report_burnout(
        db, position_id=pos.id, reported_at=when, burn_hours=40.0, replaced=True
    )
    assert rep.status == "closed" and pos.burned_out_at is None and pos.lamp_installed_at == when
    rem = db.get(LampRemoval, rep.removal_id)
    assert rem is not None and rem.failed and rem.burn_hours == 40.0


def test_removal_normalises_hours_by_voltage(db: Session) -> None:
    pos = _positions(db, measured_voltage_v=241.5)[0]  # 1.05 x rated 230 V
    removal = record_removal(
        db, pos, removed_at=T0 + timedelta(days=30), failed=False, reason="group_relamp"
    )
    # Life x (V/Vr)^-13 (inverse power law, Nelson): each hour counts 1.05^13 rated hours.
    assert removal.burn_hours == pytest.approx(30 * 12.0)
    assert removal.normalised_hours == pytest.approx(30 * 12.0 * 1.05**13)
    assert removal.operating_voltage_v == 241.5 and not removal.failed
    assert pos.lamp_installed_at == T0 + timedelta(days=30) and pos.hours_at_install == 0


def test_close_and_order_reports(db: Session) -> None:
    p = _positions(db)
    r1 = burnouts.report_burnout(db, position_id=p[0].id, reported_at=T0 + timedelta(days=1))
    r2 = burnouts.report_burnout(db, position_id=p[1].id, reported_at=T0 + timedelta(days=2))
    assert len(reports.mark_ordered(db, [r1.id], 5)) == 1
    assert [r.id for r in reports.open_burnout_reports(db)] == [r2.id]
    assert reports.reopen_reports(db, 5) == 1
    closed = reports.close_reports(db, [r1.id, r2.id], 9)
    assert {r.status for r in closed} == {"closed"} and reports.open_burnout_reports(db) == []


def test_bad_events_are_refused(
    db: Session, client: TestClient, writer: dict[str, str], reader: dict[str, str]
) -> None:
    pos = _positions(db)[0]
    cases = [
        ("/api/v1/burnout-reports", {"position_id": 999_999, "reported_at": T0.isoformat()}, 404),
        (
            "/api/v1/burnout-reports",
            {"position_id": pos.id, "reported_at": "2999-01-01T00:00:00Z"},
            422,
        ),
        (
            "/api/v1/burnout-reports",
            {"position_id": pos.id, "reported_at": "2024-01-01T00:00:00Z"},
            422,
        ),
        (
            "/api/v1/burnout-reports",
            {"position_id": pos.id, "reported_at": T0.isoformat(), "burn_hours": -3},
            422,
        ),
        (
            "/api/v1/lamp-removals",
            {
                "position_id": pos.id,
                "removed_at": T0.isoformat(),
                "failed": False,
                "reason": "whim",
            },
            422,
        ),
    ]
    for url, body, code in cases:
        r = client.post(url, json=body, headers=writer)
        assert r.status_code == code, (body, r.text)
        assert r.headers["content-type"].startswith("application/problem+json")
    r = client.post(
        "/api/v1/burnout-reports",
        json={"position_id": pos.id, "reported_at": T0.isoformat()},
        headers=reader,
    )
    assert r.status_code == 403
    assert client.get("/api/v1/lamp-removals", headers=reader).json()["total"] == 0
    assert client.get("/api/v1/burnout-reports", headers=reader).json()["total"] == 0


def test_group_removal_matches_one_by_one(db: Session) -> None:
    p = _positions(db, n_fixtures=3)
    burnouts.report_burnout(db, position_id=p[0].id, reported_at=T0 + timedelta(days=5))
    when = T0 + timedelta(days=30)
    removals = record_removals(
        db, p, removed_at=when, failed=False, reason="group_relamp", work_order_id=3
    )
    by_pos = {r.position_id: r for r in removals}
    assert by_pos[p[0].id].failed and by_pos[p[0].id].burn_hours == pytest.approx(60.0)
    for q in p[1:]:
        assert not by_pos[q.id].failed
        assert by_pos[q.id].burn_hours == pytest.approx(360.0)  # 30 days x 12 h
        assert by_pos[q.id].normalised_hours == pytest.approx(360.0)  # rated voltage
    assert all(q.lamp_installed_at == when and q.burned_out_at is None for q in p)
    assert len(db.scalars(select(LampRemoval)).all()) == 3  # one per lamp
