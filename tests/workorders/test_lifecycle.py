"""Work order lifecycle: every allowed and refused transition, completion and cancellation."""

from __future__ import annotations

from datetime import timedelta
from typing import Any

import pytest
from fastapi.testclient import TestClient
from sqlalchemy import select
from sqlalchemy.orm import Session

from service.db.base import utcnow
from service.events import burnouts
from service.events.models import BurnoutReport, LampRemoval
from service.readings.ages import position_ages
from service.register.models import LampPosition
from service.workorders.service import TRANSITIONS
from tests.factories import plan_area, plan_fixtures, plan_lamp_type, plan_site

STATES = ("draft", "issued", "in_progress", "done", "cancelled")
ACTIONS = {"issue": "issued", "start": "in_progress", "complete": "done", "cancel": "cancelled"}
PATH = {  # how to reach each state from draft
    "draft": [],
    "issued": ["issue"],
    "in_progress": ["issue", "start"],
    "done": ["issue", "start", "complete"],
    "cancelled": ["cancel"],
}


def _area(db: Session, n: int = 3, **over: Any) -> tuple[int, list[Any]]:
    s = plan_site(db)
    lt = plan_lamp_type(db)
    a = plan_area(db, s, **over)
    fx = plan_fixtures(db, a, lt, n, lamps=2, installed_at=utcnow() - timedelta(weeks=20))
    db.commit()
    return a.id, fx


def _act(client: TestClient, h: dict[str, str], oid: int, action: str) -> Any:
    body: dict[str, Any] | None = {"others": "replaced"} if action == "complete" else None
    return client.post(f"/api/v1/work-orders/{oid}/{action}", json=body, headers=h)


@pytest.mark.parametrize("start", STATES)
@pytest.mark.parametrize("action", sorted(ACTIONS))
def test_every_transition(
    client: TestClient, db: Session, writer: dict[str, str], start: str, action: str
) -> None:
    area_id, _ = _area(db, n=1)
    r = client.post(
        "/api/v1/work-orders", json={"area_id": area_id, "kind": "group_relamp"}, headers=writer
    )
    assert r.status_code == 201, r.text
    oid = r.json()["id"]
    assert r.json()["state"] == "draft"
    for step in PATH[start]:
        assert _act(client, writer, oid, step).status_code == 200
    target = ACTIONS[action]
    r = _act(client, writer, oid, action)
    if target == start:  # a retried transition that already happened answers the order
        assert r.status_code == 200, r.text
        assert r.json()["state"] == start
        assert (
            r.json()["version"]
            == client.get(f"/api/v1/work-orders/{oid}", headers=writer).json()["version"]
        )
    elif target in TRANSITIONS[start]:
        assert r.status_code == 200, r.text
        assert r.json()["state"] == target
        assert r.json()["allowed_next"] == list(TRANSITIONS[target])
    else:
        assert r.status_code == 409, r.text
        body = r.json()
        assert body["current_state"] == start
        assert body["allowed_next"] == list(TRANSITIONS[start])
        assert start in body["detail"]
        got = client.get(f"/api/v1/work-orders/{oid}", headers=writer).json()
        assert got["state"] == start


def test_transition_table_is_the_documented_one() -> None:
    # draft -> issued -> in_progress -> done, cancel from any open state; finals stay final.
    assert TRANSITIONS == {
        "draft": ("issued", "cancelled"),
        "issued": ("in_progress", "cancelled"),
        "in_progress": ("done", "cancelled"),
        "done": (),
        "cancelled": (),
    }


def _in_progress(client: TestClient, h: dict[str, str], area_id: int, kind: str) -> dict[str, Any]:
    r = client.post("/api/v1/work-orders", json={"area_id": area_id, "kind": kind}, headers=h)
    assert r.status_code == 201, r.text
    oid = r.json()["id"]
    for step in ("issue", "start"):
        assert _act(client, h, oid, step).status_code == 200
    return client.get(f"/api/v1/work-orders/{oid}", headers=h).json()


def test_group_completion_resets_ages_and_feeds_the_field_fit(
    client: TestClient, db: Session, writer: dict[str, str]
) -> None:
    area_id, fx = _area(db, n=3)
    dark = fx[0].positions[0]
    report = burnouts.report_burnout(
        db, position_id=dark.id, reported_at=utcnow() - timedelta(days=2)
    )
    db.commit()
    order = _in_progress(client, writer, area_id, "group_relamp")
    assert order["lamp_quantity"] == 6 and len(order["lines"]) == 3
    skipped = fx[2]
    body = {
        "outcomes": [{"fixture_id": skipped.id, "outcome": "skipped", "reason": "locked room"}],
        "others": "replaced",
    }
    r = client.post(f"/api/v1/work-orders/{order['id']}/complete", json=body, headers=writer)
    assert r.status_code == 200, r.text
    done = r.json()
    assert done["state"] == "done" and done["completed_at"] is not None
    outcome = {ln["fixture_id"]: ln["outcome"] for ln in done["lines"]}
    assert outcome == {fx[0].id: "replaced", fx[1].id: "replaced", skipped.id: "skipped"}

    replaced_ids = [p.id for f in fx[:2] for p in f.positions]
    removals = db.scalars(
        select(LampRemoval).where(
            LampRemoval.position_id.in_([p.id for f in fx for p in f.positions])
        )
    ).all()
    by_pos = {r.position_id: r for r in removals}
    assert set(by_pos) == set(replaced_ids)  # the skipped fixture recorded nothing
    assert by_pos[dark.id].failed is True and by_pos[dark.id].work_order_id == order["id"]
    burning = [by_pos[p] for p in replaced_ids if p != dark.id]
    assert all(not x.failed and x.reason == "group_relamp" for x in burning)
    assert all(x.work_order_id == order["id"] for x in burning)
    assert all(x.burn_hours > 1000 for x in burning)  # 20 weeks at 60 h a week
    # Ages: replaced positions restart at zero; the skipped fixture keeps its lamps' age.
    ages = position_ages(db, area_id=area_id)
    age = dict(zip(ages.position_id.tolist(), ages.age_h.tolist(), strict=True))
    assert all(age[p] < 1.0 for p in replaced_ids)
    assert all(age[p.id] > 1000 for p in skipped.positions)
    db.expire_all()
    assert db.get(BurnoutReport, report.id).status == "closed"  # type: ignore[union-attr]


def test_spot_completion_closes_reports_and_reopens_skipped(
    client: TestClient, db: Session, writer: dict[str, str]
) -> None:
    area_id, fx = _area(db, n=2)
    reps = [
        burnouts.report_burnout(
            db, position_id=f.positions[0].id, reported_at=utcnow() - timedelta(hours=5)
        )
        for f in fx
    ]
    db.commit()
    order = _in_progress(client, writer, area_id, "spot_replacement")
    assert order["lamp_quantity"] == 2
    assert sorted(r for ln in order["lines"] for r in ln["report_ids"]) == sorted(
        r.id for r in reps
    )
    db.expire_all()
    assert {db.get(BurnoutReport, r.id).status for r in reps} == {"ordered"}  # type: ignore[union-attr]
    body = {
        "outcomes": [
            {"fixture_id": fx[0].id, "outcome": "replaced"},
            {"fixture_id": fx[1].id, "outcome": "skipped", "reason": "no lamp in stock"},
        ]
    }
    r = client.post(f"/api/v1/work-orders/{order['id']}/complete", json=body, headers=writer)
    assert r.status_code == 200, r.text
    db.expire_all()
    first, second = (db.get(BurnoutReport, x.id) for x in reps)
    assert first is not None and second is not None
    assert first.status == "closed" and first.work_order_id == order["id"]
    assert second.status == "open" and second.work_order_id is None
    # One failure record per dark lamp (written at the report), tied to the order now.
    recs = db.scalars(
        select(LampRemoval).where(LampRemoval.position_id == fx[0].positions[0].id)
    ).all()
    assert len(recs) == 1 and recs[0].failed and recs[0].work_order_id == order["id"]
    pos = db.get(LampPosition, fx[0].positions[0].id)
    assert pos is not None and pos.burned_out_at is None and pos.hours_at_install == 0.0


def test_cancel_leaves_positions_and_reopens_reports(
    client: TestClient, db: Session, writer: dict[str, str]
) -> None:
    area_id, fx = _area(db, n=2)
    rep = burnouts.report_burnout(
        db, position_id=fx[0].positions[0].id, reported_at=utcnow() - timedelta(hours=1)
    )
    db.commit()
    before = {
        p.id: (p.lamp_installed_at, p.hours_at_install, p.burned_out_at)
        for f in fx
        for p in f.positions
    }
    spot = _in_progress(client, writer, area_id, "spot_replacement")
    group = _in_progress(client, writer, area_id, "group_relamp")
    for o in (spot, group):
        r = client.post(
            f"/api/v1/work-orders/{o['id']}/cancel", json={"reason": "budget"}, headers=writer
        )
        assert r.status_code == 200 and r.json()["cancel_reason"] == "budget"
    db.expire_all()
    after = {
        p.id: (p.lamp_installed_at, p.hours_at_install, p.burned_out_at)
        for p in db.scalars(select(LampPosition).where(LampPosition.id.in_(list(before))))
    }
    assert after == before
    got = db.get(BurnoutReport, rep.id)
    assert got is not None and got.status == "open" and got.work_order_id is None
    assert (
        db.scalars(
            select(LampRemoval).where(LampRemoval.work_order_id.in_([spot["id"], group["id"]]))
        ).all()
        == []
    )


def test_bad_completion_changes_nothing(
    client: TestClient, db: Session, writer: dict[str, str]
) -> None:
    area_id, fx = _area(db, n=2)
    order = _in_progress(client, writer, area_id, "group_relamp")
    url = f"/api/v1/work-orders/{order['id']}/complete"
    cases = [
        (
            {"outcomes": [{"fixture_id": fx[0].id, "outcome": "skipped"}], "others": "replaced"},
            "outcomes.0",
        ),
        (
            {"outcomes": [{"fixture_id": 999999, "outcome": "replaced"}], "others": "replaced"},
            "outcomes.0.fixture_id",
        ),
        ({"outcomes": [{"fixture_id": fx[0].id, "outcome": "replaced"}]}, "outcomes"),
        (
            {"others": "replaced", "completed_at": (utcnow() + timedelta(days=2)).isoformat()},
            "completed_at",
        ),
    ]
    for body, field in cases:
        r = client.post(url, json=body, headers=writer)
        assert r.status_code == 422, r.text
        assert any(e["field"] == field for e in r.json()["errors"]), r.json()
    got = client.get(f"/api/v1/work-orders/{order['id']}", headers=writer).json()
    assert got["state"] == "in_progress" and all(ln["outcome"] is None for ln in got["lines"])
    assert (
        db.scalars(select(LampRemoval).where(LampRemoval.work_order_id == order["id"])).all() == []
    )


def test_second_open_group_order_and_empty_spot_order_are_refused(
    client: TestClient, db: Session, writer: dict[str, str], reader: dict[str, str]
) -> None:
    area_id, _ = _area(db, n=1)
    body = {"area_id": area_id, "kind": "group_relamp"}
    assert client.post("/api/v1/work-orders", json=body, headers=writer).status_code == 201
    assert client.post("/api/v1/work-orders", json=body, headers=writer).status_code == 409
    spot = {"area_id": area_id, "kind": "spot_replacement"}
    assert client.post("/api/v1/work-orders", json=spot, headers=writer).status_code == 409
    assert client.post("/api/v1/work-orders", json=body, headers=reader).status_code == 403


def test_spot_order_after_a_group_relamp_records_nothing_twice(
    client: TestClient, db: Session, writer: dict[str, str]
) -> None:
    area_id, fx = _area(db, n=2)
    dark = fx[0].positions[0]
    burnouts.report_burnout(db, position_id=dark.id, reported_at=utcnow() - timedelta(hours=4))
    db.commit()
    spot = _in_progress(client, writer, area_id, "spot_replacement")
    group = _in_progress(client, writer, area_id, "group_relamp")
    url = "/api/v1/work-orders/{}/complete"
    r = client.post(url.format(group["id"]), json={"others": "replaced"}, headers=writer)
    assert r.status_code == 200
    # The group order covered the spot order and settled it: nothing is left to send.
    got = client.get(f"/api/v1/work-orders/{spot['id']}", headers=writer).json()
    assert got["state"] == "done" and got["covered_by_order_id"] == group["id"]
    assert f"Replaced by group order {group['id']}" in got["notes"]
    assert client.get(f"/api/v1/work-orders/{group['id']}", headers=writer).json()["covers"] == [
        spot["id"]
    ]
    page = client.get(f"/api/v1/work-orders/{spot['id']}/print", headers=writer).text
    assert f"Covered by group order {group['id']}" in page
    page = client.get(f"/api/v1/work-orders/{group['id']}/print", headers=writer).text
    assert f"Covers spot order(s) {spot['id']}" in page and "reported dark (1)" in page
    r = client.post(url.format(spot["id"]), json={"others": "replaced"}, headers=writer)
    assert r.status_code == 409  # already settled; a completion of its own changes nothing
    recs = db.scalars(select(LampRemoval).where(LampRemoval.position_id == dark.id)).all()
    assert len(recs) == 1 and recs[0].failed  # the one failure, not a second at zero hours
    assert (
        db.scalars(select(LampRemoval).where(LampRemoval.work_order_id == spot["id"])).all() == []
    )


def test_per_position_completion_over_http(
    client: TestClient, db: Session, writer: dict[str, str]
) -> None:
    area_id, fx = _area(db, n=2)
    order = _in_progress(client, writer, area_id, "group_relamp")
    p0, p1 = fx[0].positions
    body = {
        "positions": [
            {"position_id": p0.id, "outcome": "found_dark"},
            {"position_id": p1.id, "outcome": "skipped", "reason": "fixture lens cracked"},
        ],
        "others": "replaced",
    }
    url = f"/api/v1/work-orders/{order['id']}/complete"
    r = client.post(url, json=body, headers=writer)
    assert r.status_code == 200, r.text
    line = next(ln for ln in r.json()["lines"] if ln["fixture_id"] == fx[0].id)
    assert line["outcome"] == "partial"
    assert line["position_outcomes"][1] == {
        "position_id": p1.id,
        "outcome": "skipped",
        "reason": "fixture lens cracked",
    }
    assert client.post(url, json=body, headers=writer).status_code == 200  # retry
    bad = {"positions": [{"position_id": p0.id, "outcome": "skipped"}], "others": "replaced"}
    r = client.post(url, json=bad, headers=writer)
    assert r.status_code == 422
