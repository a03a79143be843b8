"""Order completion and cancel forms through the app: by role, outcomes, repeats, refusals."""

from __future__ import annotations

import re
from datetime import timedelta
from typing import Any

import pytest
from fastapi.testclient import TestClient
from sqlalchemy import select
from sqlalchemy.orm import Session

from service.db.base import utcnow
from service.events.models import LampRemoval
from service.register.models import LampPosition
from service.users import service as users
from service.workorders import service as orders
from service.workorders.models import WorkOrderLine
from service.workorders.schemas import WorkOrderCreate
from tests.factories import plan_area, plan_fixtures, plan_lamp_type, plan_site

PASSWORD = "correct horse battery"


def _sign_in(client: TestClient, db: Session, role: str) -> str:
    """A new user of the role, signed in; the page CSRF token."""
    name = f"{role[:4]}{db.info.setdefault('n', 0)}"
    db.info["n"] += 1
    users.create_user(db, name, name, role, PASSWORD)
    db.commit()
    r = client.post(
        "/sign-in", data={"username": name, "password": PASSWORD}, follow_redirects=False
    )
    assert r.status_code == 303, r.text
    m = re.search(r'name="csrf_token" value="([^"]+)"', client.get("/app").text)
    assert m
    return m.group(1)


def _order(db: Session, state: str, n: int = 2) -> tuple[int, list[int]]:
    """A group order of n two-lamp fixtures moved to a state; (order id, fixture ids)."""
    s = plan_site(db)
    a = plan_area(db, s)
    fx = plan_fixtures(
        db, a, plan_lamp_type(db), n, lamps=2, installed_at=utcnow() - timedelta(weeks=20)
    )
    order = orders.create(db, WorkOrderCreate(area_id=a.id, kind="group_relamp"))
    if state in ("issued", "in_progress"):
        orders.issue(db, order.id)
    if state == "in_progress":
        orders.start(db, order.id)
    db.commit()
    return order.id, [f.id for f in fx]


@pytest.mark.parametrize(
    ("role", "complete", "cancel"),
    [
        ("viewer", False, False),
        ("technician", True, False),
        ("planner", True, True),
        ("administrator", True, True),
    ],
)
def test_forms_shown_by_role(
    client: TestClient, db: Session, role: str, complete: bool, cancel: bool
) -> None:
    oid, _ = _order(db, "in_progress")
    _sign_in(client, db, role)
    html = client.get(f"/app/work-orders/{oid}").text
    assert (f'action="/app/work-orders/{oid}/complete"' in html) is complete
    assert (f'action="/app/work-orders/{oid}/cancel"' in html) is cancel
    assert "Isolate and lock off the power" in html  # the safety cautions


def test_complete_form_only_when_started(client: TestClient, db: Session) -> None:
    oid, _ = _order(db, "issued")
    _sign_in(client, db, "administrator")
    html = client.get(f"/app/work-orders/{oid}").text
    assert "/complete" not in html
    assert f'action="/app/work-orders/{oid}/cancel"' in html


def _fields(token: str, outcomes: list[tuple[int, str, str]]) -> dict[str, Any]:
    """The completion form's fields: parallel lists, one entry per fixture row."""
    return {
        "csrf_token": token,
        "fixture_id": [str(o[0]) for o in outcomes],
        "outcome": [o[1] for o in outcomes],
        "reason": [o[2] for o in outcomes],
    }


def test_complete_replaced_and_skipped(client: TestClient, db: Session) -> None:
    oid, (f1, f2) = _order(db, "in_progress")
    token = _sign_in(client, db, "technician")
    data = _fields(token, [(f1, "replaced", ""), (f2, "skipped", "no lift access today")])
    r = client.post(f"/app/work-orders/{oid}/complete", data=data, follow_redirects=False)
    assert r.status_code == 303, r.text
    db.expire_all()
    lines = {
        ln.fixture_id: ln
        for ln in db.scalars(select(WorkOrderLine).where(WorkOrderLine.work_order_id == oid))
    }
    assert (lines[f1].outcome, lines[f2].outcome) == ("replaced", "skipped")
    assert lines[f2].skip_reason == "no lift access today"
    # Replaced lamps were still burning: censored removals for f1's two positions only.
    removed = db.scalars(select(LampRemoval.position_id).where(LampRemoval.work_order_id == oid))
    f1_positions = db.scalars(select(LampPosition.id).where(LampPosition.fixture_id == f1))
    assert sorted(removed) == sorted(f1_positions)
    page = client.get(f"/app/work-orders/{oid}").text
    assert '<strong id="order-state">done</strong>' in page
    assert "skipped: no lift access today" in page
    # The same form sent again (a double tap, a retry) answers the done order unchanged.
    r = client.post(f"/app/work-orders/{oid}/complete", data=data, follow_redirects=False)
    assert r.status_code == 303
    # Other outcomes after completion are refused and change nothing.
    other = _fields(token, [(f1, "replaced", ""), (f2, "replaced", "")])
    r = client.post(f"/app/work-orders/{oid}/complete", data=other)
    assert r.status_code == 409
    db.expire_all()
    assert db.get(WorkOrderLine, lines[f2].id).outcome == "skipped"  # type: ignore[union-attr]


def test_skip_without_reason_names_the_row(client: TestClient, db: Session) -> None:
    oid, (f1, f2) = _order(db, "in_progress")
    token = _sign_in(client, db, "planner")
    data = _fields(token, [(f1, "replaced", ""), (f2, "skipped", "  ")])
    r = client.post(f"/app/work-orders/{oid}/complete", data=data)
    assert r.status_code == 422
    assert f"Row 2 (fixture {f2})" in r.text and "needs a reason" in r.text
    assert orders.get_order(db, oid).state == "in_progress"


def test_missing_outcome_refused(client: TestClient, db: Session) -> None:
    oid, (f1, _) = _order(db, "in_progress")
    token = _sign_in(client, db, "technician")
    r = client.post(f"/app/work-orders/{oid}/complete", data=_fields(token, [(f1, "replaced", "")]))
    assert r.status_code == 422  # the other fixture has no outcome
    assert "no outcome for fixtures" in r.text
    db.expire_all()
    assert orders.get_order(db, oid).state == "in_progress"


def test_viewer_complete_refused(client: TestClient, db: Session) -> None:
    oid, (f1, f2) = _order(db, "in_progress")
    token = _sign_in(client, db, "viewer")
    data = _fields(token, [(f1, "replaced", ""), (f2, "replaced", "")])
    r = client.post(f"/app/work-orders/{oid}/complete", data=data)
    assert r.status_code == 403 and "may not" in r.text
    assert orders.get_order(db, oid).state == "in_progress"


def test_complete_without_csrf_refused(client: TestClient, db: Session) -> None:
    oid, (f1, f2) = _order(db, "in_progress")
    _sign_in(client, db, "technician")
    data = _fields("", [(f1, "replaced", ""), (f2, "replaced", "")])
    r = client.post(f"/app/work-orders/{oid}/complete", data=data)
    assert r.status_code == 403 and "CSRF" in r.text


def test_cancel_by_planner_with_reason(client: TestClient, db: Session) -> None:
    oid, _ = _order(db, "issued")
    token = _sign_in(client, db, "planner")
    r = client.post(f"/app/work-orders/{oid}/cancel", data={"csrf_token": token, "reason": " "})
    assert r.status_code == 422 and "Say why" in r.text
    r = client.post(
        f"/app/work-orders/{oid}/cancel",
        data={"csrf_token": token, "reason": "lift hire moved <b>"},
        follow_redirects=False,
    )
    assert r.status_code == 303
    page = client.get(f"/app/work-orders/{oid}").text
    assert "lift hire moved &lt;b&gt;" in page
    assert '<strong id="order-state">cancelled</strong>' in page


def test_technician_cancel_refused(client: TestClient, db: Session) -> None:
    oid, _ = _order(db, "issued")
    token = _sign_in(client, db, "technician")
    r = client.post(f"/app/work-orders/{oid}/cancel", data={"csrf_token": token, "reason": "x"})
    assert r.status_code == 403
    assert orders.get_order(db, oid).state == "issued"


def test_burnout_report_post(client: TestClient, db: Session) -> None:
    s = plan_site(db)
    a = plan_area(db, s)
    (fx,) = plan_fixtures(
        db, a, plan_lamp_type(db), 1, lamps=2, installed_at=utcnow() - timedelta(weeks=5)
    )
    db.commit()
    pos = db.scalars(select(LampPosition).where(LampPosition.fixture_id == fx.id)).first()
    assert pos is not None
    token = _sign_in(client, db, "technician")
    form = client.get(f"/f/{s.id}/{fx.tag}")
    assert form.status_code == 200 and f'value="{pos.id}"' in form.text
    r = client.post(
        "/app/report", data={"csrf_token": token, "position_id": str(pos.id), "note": "dark"}
    )
    assert r.status_code == 200 and "Burnout recorded" in r.text
    db.expire_all()
    assert db.get(LampPosition, pos.id).burned_out_at is not None  # type: ignore[union-attr]
    again = client.get(f"/f/{s.id}/{fx.tag}").text
    assert "already reported dark" in again
