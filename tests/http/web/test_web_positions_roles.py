"""Per-position completion from the page, and every page POST refused by role on the server."""

from __future__ import annotations

from datetime import timedelta

import pytest
from fastapi.testclient import TestClient
from sqlalchemy import select
from sqlalchemy.orm import Session

from service.db.base import utcnow
from service.events.models import LampRemoval
from service.register.models import LampPosition
from service.workorders import service as orders
from service.workorders.models import WorkOrder, WorkOrderLine
from service.workorders.schemas import WorkOrderCreate
from tests.factories import plan_area, plan_fixtures, plan_lamp_type, plan_site
from tests.http.web.signin import sign_in_as


def _started_order(db: Session) -> tuple[int, list[list[int]]]:
    """A started group order of two two-lamp fixtures; (order id, position ids per fixture)."""
    s = plan_site(db)
    a = plan_area(db, s)
    fx = plan_fixtures(
        db, a, plan_lamp_type(db), 2, lamps=2, installed_at=utcnow() - timedelta(weeks=30)
    )
    oid = orders.create(db, WorkOrderCreate(area_id=a.id, kind="group_relamp")).id
    orders.issue(db, oid)
    orders.start(db, oid)
    db.commit()
    positions = [
        list(
            db.scalars(
                select(LampPosition.id)
                .where(LampPosition.fixture_id == f.id)
                .order_by(LampPosition.position_no)
            )
        )
        for f in fx
    ]
    return oid, positions


def test_one_lamp_found_dark_one_skipped(client: TestClient, db: Session) -> None:
    oid, ((p1, p2), (p3, p4)) = _started_order(db)
    token = sign_in_as(client, db, "technician")
    html = client.get(f"/app/work-orders/{oid}").text
    assert html.count('name="position_outcome"') == 4 and "found dark" in html
    rows = [(p1, "found_dark", ""), (p2, "replaced", ""), (p3, "skipped", "cracked holder")]
    rows.append((p4, "replaced", ""))
    data = {
        "csrf_token": token,
        "position_id": [str(r[0]) for r in rows],
        "position_outcome": [r[1] for r in rows],
        "position_reason": [r[2] for r in rows],
    }
    r = client.post(f"/app/work-orders/{oid}/complete", data=data, follow_redirects=False)
    assert r.status_code == 303, r.text
    db.expire_all()
    removals = {
        rm.position_id: rm.failed
        for rm in db.scalars(select(LampRemoval).where(LampRemoval.work_order_id == oid))
    }
    # Found dark is a failure, replaced-while-burning is censored, the skipped lamp stays.
    assert removals == {p1: True, p2: False, p4: False}
    lines = db.scalars(select(WorkOrderLine).where(WorkOrderLine.work_order_id == oid)).all()
    assert sorted(ln.outcome or "" for ln in lines) == ["partial", "replaced"]
    assert any(ln.skip_reason == "cracked holder" for ln in lines)
    page = client.get(f"/app/work-orders/{oid}").text
    assert "position 1: skipped (cracked holder)" in page and "found dark" in page
    # A retry of the same form answers the done order; a different one is a 409.
    again = client.post(f"/app/work-orders/{oid}/complete", data=data, follow_redirects=False)
    assert again.status_code == 303
    data["position_outcome"] = ["replaced"] * 4
    data["position_reason"] = [""] * 4
    assert client.post(f"/app/work-orders/{oid}/complete", data=data).status_code == 409


def test_skipped_position_without_reason_names_it(client: TestClient, db: Session) -> None:
    oid, ((p1, p2), (p3, p4)) = _started_order(db)
    token = sign_in_as(client, db, "planner")
    data = {
        "csrf_token": token,
        "position_id": [str(p) for p in (p1, p2, p3, p4)],
        "position_outcome": ["replaced", "skipped", "replaced", "replaced"],
        "position_reason": ["", " ", "", ""],
    }
    r = client.post(f"/app/work-orders/{oid}/complete", data=data)
    assert r.status_code == 422 and f"Position row 2 (position {p2})" in r.text
    db.expire_all()
    assert orders.get_order(db, oid).state == "in_progress"
    assert db.scalars(select(LampRemoval).where(LampRemoval.work_order_id == oid)).all() == []


# Every page POST, with the least role allowed to send it (None: every signed-in role).
POSTS = [
    ("/app/report", "technician"),
    ("/app/work-orders/{oid}/issued", "planner"),
    ("/app/work-orders/{oid}/in_progress", "technician"),
    ("/app/work-orders/{oid}/complete", "technician"),
    ("/app/work-orders/{oid}/cancel", "planner"),
    ("/app/fixtures/new", "planner"),
    ("/app/fixtures/{fid}/edit", "planner"),
    ("/app/fixtures/import", "planner"),
    ("/app/runs", "planner"),
]
RANK = ["viewer", "technician", "planner", "administrator"]


@pytest.mark.parametrize("role", RANK)
@pytest.mark.parametrize(("path", "least"), POSTS)
def test_server_refuses_by_role(
    client: TestClient, db: Session, role: str, path: str, least: str
) -> None:
    oid, ((p1, _), _) = _started_order(db)
    fid = db.scalar(select(LampPosition.fixture_id).where(LampPosition.id == p1))
    token = sign_in_as(client, db, role)
    url = path.format(oid=oid, fid=fid)
    # Enough of each form to reach the handler: a position, a site, an empty file.
    site_id = db.scalar(select(WorkOrder.site_id).where(WorkOrder.id == oid))
    data = {"csrf_token": token, "position_id": str(p1), "site_id": str(site_id)}
    files = {"file": ("x.csv", b"", "text/csv")} if url.endswith("/import") else None
    r = client.post(url, data=data, files=files, follow_redirects=False)
    if RANK.index(role) < RANK.index(least):
        assert r.status_code == 403, (url, role, r.status_code)
        assert "may not do this" in r.text
    else:
        # Allowed past the role check: the form is then judged on its content.
        assert r.status_code != 403, (url, role)
    db.expire_all()
    assert orders.get_order(db, oid).state == "in_progress"  # the bare form moved no order
