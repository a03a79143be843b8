"""Integrator views: polling by change time, external reference, lines as JSON/CSV, print page."""

from __future__ import annotations

import csv
import io
import time
from datetime import UTC, datetime, timedelta

from fastapi.testclient import TestClient
from sqlalchemy.orm import Session

from service.db.base import utcnow
from tests.factories import plan_area, plan_fixtures, plan_lamp_type, plan_site


def _order(client: TestClient, db: Session, h: dict[str, str], location: str = "Bay 1") -> dict:
    s = plan_site(db)
    lt = plan_lamp_type(db, code=f"T8-<b>{s.id}")
    a = plan_area(db, s, access_method="lift")
    plan_fixtures(db, a, lt, 3, lamps=2, location=location)
    db.commit()
    r = client.post(
        "/api/v1/work-orders", json={"area_id": a.id, "kind": "group_relamp"}, headers=h
    )
    assert r.status_code == 201, r.text
    return r.json()


def test_order_carries_cautions_and_disposal(
    client: TestClient, db: Session, writer: dict[str, str]
) -> None:
    o = _order(client, db, writer)
    assert o["access_method"] == "lift" and o["lamp_quantity"] == 6
    assert o["estimated_labour_h"] == round(6 * 4.0 / 60.0, 2)  # 4 group minutes per lamp
    assert "lock out" in o["safety_cautions"] and "fall-protection" in o["safety_cautions"]
    assert "local codes and licensed practice" in o["safety_cautions"]
    # a Lisbon site: EU examples (Directive 2012/19/EU), not the US universal waste rule
    assert "2012/19/EU" in o["disposal_instructions"]
    assert "40 CFR" not in o["disposal_instructions"] + o["safety_cautions"]


def test_changed_since_sees_state_changes_and_external_reference(
    client: TestClient, db: Session, writer: dict[str, str]
) -> None:
    o = _order(client, db, writer)
    other = _order(client, db, writer)
    time.sleep(0.02)
    mark = datetime.now(UTC)
    time.sleep(0.02)
    assert client.post(f"/api/v1/work-orders/{o['id']}/issue", headers=writer).status_code == 200
    r = client.get(
        "/api/v1/work-orders", params={"changed_since": mark.isoformat()}, headers=writer
    )
    assert r.status_code == 200
    ids = [x["id"] for x in r.json()["items"]]
    assert ids == [o["id"]] and other["id"] not in ids
    r = client.patch(
        f"/api/v1/work-orders/{other['id']}", json={"external_reference": "CM-0042"}, headers=writer
    )
    assert r.status_code == 200 and r.json()["external_reference"] == "CM-0042"
    r = client.get(
        "/api/v1/work-orders",
        params={"changed_since": mark.isoformat(), "include_lines": "true"},
        headers=writer,
    )
    items = r.json()["items"]
    assert {x["id"] for x in items} == {o["id"], other["id"]}
    assert all(len(x["lines"]) == 3 for x in items)
    naive = client.get(
        "/api/v1/work-orders", params={"changed_since": "2026-01-01T00:00:00"}, headers=writer
    )
    assert naive.status_code == 422 and naive.json()["errors"][0]["field"] == "changed_since"
    bad = client.patch(f"/api/v1/work-orders/{o['id']}", json={"state": "done"}, headers=writer)
    assert bad.status_code == 422


def test_lines_json_and_csv(
    client: TestClient, db: Session, reader: dict[str, str], writer: dict[str, str]
) -> None:
    o = _order(client, db, writer, location="=HYPERLINK(x)")
    lines = client.get(f"/api/v1/work-orders/{o['id']}/lines", headers=reader).json()
    assert len(lines) == 3 and all(ln["quantity"] == 2 for ln in lines)
    r = client.get(f"/api/v1/work-orders/{o['id']}/lines.csv", headers=reader)
    assert r.status_code == 200 and r.headers["content-type"].startswith("text/csv")
    rows = list(csv.DictReader(io.StringIO(r.text)))
    assert [int(x["fixture_id"]) for x in rows] == [ln["fixture_id"] for ln in lines]
    assert all(x["position_nos"] == "1;2" for x in rows)
    assert all(x["location"].startswith("'=") for x in rows)  # formula cells disarmed
    assert client.get("/api/v1/work-orders/999999/lines.csv", headers=reader).status_code == 404


def test_print_page_groups_by_location_and_escapes(
    client: TestClient, db: Session, reader: dict[str, str], writer: dict[str, str]
) -> None:
    o = _order(client, db, writer, location="<script>alert(1)</script>")
    r = client.get(f"/api/v1/work-orders/{o['id']}/print", headers=reader)
    assert r.status_code == 200 and r.headers["content-type"].startswith("text/html")
    html = r.text
    assert "<script>" not in html and "&lt;script&gt;" in html
    assert "&lt;b&gt;" in html  # the lamp type code is escaped too
    assert html.index("Safety cautions") < html.index("<main>")
    assert html.count('role="checkbox"') == 6  # one per position
    assert html.count('<section class="location">') == 1
    assert client.get(f"/api/v1/work-orders/{o['id']}/print").status_code == 401


def test_due_date_patch_and_list_filters(
    client: TestClient, db: Session, writer: dict[str, str]
) -> None:
    o = _order(client, db, writer)
    due = (utcnow() + timedelta(days=10)).date().isoformat()
    r = client.patch(f"/api/v1/work-orders/{o['id']}", json={"due_on": due}, headers=writer)
    assert r.json()["due_on"] == due
    r = client.get(
        "/api/v1/work-orders", params={"state": "draft", "site_id": o["site_id"]}, headers=writer
    )
    assert [x["id"] for x in r.json()["items"]] == [o["id"]]
    r = client.get("/api/v1/work-orders", params={"state": "finished"}, headers=writer)
    assert r.status_code == 422


def test_print_page_walks_locations_in_natural_order() -> None:
    from service.workorders.exports import natural_key, print_page
    from service.workorders.models import WorkOrder, WorkOrderLine

    def line(tag: str, location: str | None) -> WorkOrderLine:
        return WorkOrderLine(
            fixture_tag=tag,
            location=location,
            lamp_type_code="T",
            position_ids=[1],
            position_nos=[1],
        )

    order = WorkOrder(
        id=9,
        kind="group_relamp",
        state="issued",
        access_method="ladder",
        lamp_quantity=4,
        estimated_labour_h=1.0,
        safety_cautions="Lock out.",
        disposal_instructions="Recycle.",
    )
    lines = [
        line("F-10", "Bay 10"),
        line("F-2", "Bay 2"),
        line("F-9", "Bay 2"),
        line("F-1", "Bay 1"),
    ]
    html = print_page(order, lines, "Site", "Area")
    assert html.index("Bay 1<") < html.index("Bay 2<") < html.index("Bay 10<")
    assert html.index(">F-2<") < html.index(">F-9<")  # one Bay 2 section, tags in order
    assert html.count('<section class="location">') == 3
    assert sorted(["can 10", "Can 2", "can 1"], key=natural_key) == ["can 1", "Can 2", "can 10"]
