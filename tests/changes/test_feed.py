"""The change feed over the API: kinds, bodies, paging, filters, cursors, retention, pruning."""

from __future__ import annotations

import time
from datetime import timedelta
from typing import Any

from fastapi.testclient import TestClient
from sqlalchemy import func, insert, select
from sqlalchemy.orm import Session, sessionmaker

from service.changes.cursors import Cursor, encode
from service.changes.models import Change
from service.changes.service import prune
from service.db.base import utcnow
from tests import factories as fx
from tests.changes.slow_writer import site
from tests.changes.test_slow_writer import read_all, start_cursor

SITE: dict[str, Any] = {
    "name": "Feed Yard",
    "time_zone": "Europe/Lisbon",
    "nominal_voltage_v": 230,
    "currency": "EUR",
    "energy_price_per_kwh": 0.21,
    "labour_rate_per_h": 38.0,
}


def changes(client: TestClient, headers: dict[str, str], **params: Any) -> Any:
    """One page of the feed (asserting 200)."""
    r = client.get("/api/v1/changes", params=params, headers=headers)
    assert r.status_code == 200, r.text
    return r.json()


def test_site_lifecycle_appears_in_order(live: TestClient, live_admin: dict[str, str]) -> None:
    after = start_cursor(live, live_admin)
    created = live.post("/api/v1/sites", json={**SITE, "name": "Feed A"}, headers=live_admin)
    assert created.status_code == 201, created.text
    sid = created.json()["id"]
    r = live.patch(f"/api/v1/sites/{sid}", json={"labour_rate_per_h": 40.0}, headers=live_admin)
    assert r.status_code == 200, r.text
    assert live.post(f"/api/v1/sites/{sid}/retire", headers=live_admin).status_code == 200
    other = live.post("/api/v1/sites", json={**SITE, "name": "Feed B"}, headers=live_admin).json()
    assert live.delete(f"/api/v1/sites/{other['id']}", headers=live_admin).status_code == 204

    items, _ = read_all(live, live_admin, after, at_least=5)
    got = [(c["resource_id"], c["kind"], c["version"]) for c in items]
    assert got == [
        (sid, "created", 1),
        (sid, "updated", 2),
        (sid, "retired", 3),
        (other["id"], "created", 1),
        (other["id"], "deleted", 1),
    ]
    assert items[1]["body"]["labour_rate_per_h"] == 40.0  # the body at that version
    assert items[2]["body"]["retired_at"] is not None
    assert items[4]["body"] is None  # tombstone
    assert {c["resource_type"] for c in items} == {"site"}


def test_fixture_and_position_retirement_and_delete_appear(
    live: TestClient, live_admin: dict[str, str]
) -> None:
    s = fx.api_site(live, live_admin, name="Feed C")
    a = fx.api_area(live, live_admin, s["id"])
    lt = fx.api_lamp_type(live, live_admin, code="FEED-LT")
    after = start_cursor(live, live_admin)
    kept = fx.api_fixture(live, live_admin, a["id"], lt["id"], tag="FEED-1")
    gone = fx.api_fixture(live, live_admin, a["id"], lt["id"], tag="FEED-2")
    r = live.post(f"/api/v1/fixtures/{kept['id']}/retire", headers=live_admin)
    assert r.status_code == 200, r.text
    assert live.delete(f"/api/v1/fixtures/{gone['id']}", headers=live_admin).status_code == 204

    items: list[Any] = []
    cursor, deadline = after, time.monotonic() + 60
    while time.monotonic() < deadline:  # PostgreSQL shows a commit once older ones finish
        page = changes(live, live_admin, after=cursor, types="fixture,lamp_position", limit=50)
        items += page["items"]
        cursor = page["next_cursor"]
        if sum(c["resource_type"] == "fixture" for c in items) >= 4:
            break
        time.sleep(0.2)
    fixtures = [(c["resource_id"], c["kind"]) for c in items if c["resource_type"] == "fixture"]
    assert (kept["id"], "created") in fixtures and (kept["id"], "retired") in fixtures
    assert fixtures.index((kept["id"], "created")) < fixtures.index((kept["id"], "retired"))
    assert (gone["id"], "deleted") in fixtures
    tomb = next(c for c in items if (c["resource_id"], c["kind"]) == (gone["id"], "deleted"))
    assert tomb["body"] is None
    # The deleted fixture's lamp positions go with it, and the feed says so.
    positions = [c for c in items if c["resource_type"] == "lamp_position"]
    assert any(c["kind"] == "created" for c in positions)
    assert any(c["kind"] == "deleted" and c["body"] is None for c in positions)


def test_paging_one_by_one_repeats_and_skips_nothing(
    live: TestClient, live_admin: dict[str, str]
) -> None:
    after = start_cursor(live, live_admin)
    for i in range(5):
        r = live.post("/api/v1/sites", json={**SITE, "name": f"Page {i}"}, headers=live_admin)
        assert r.status_code == 201
    read_all(live, live_admin, after, at_least=5)  # all visible
    seen, cursor = [], after
    for _ in range(10):
        # sites only: another test's late-visible commits (PostgreSQL) are not this one's
        page = changes(
            live, live_admin, limit=1, types="site", **({"after": cursor} if cursor else {})
        )
        seen += [c["body"]["name"] for c in page["items"]]
        cursor = page["next_cursor"]
        if not page["has_more"]:
            break
    assert seen == [f"Page {i}" for i in range(5)]
    again = changes(live, live_admin, after=cursor, types="site")
    assert again["items"] == [] and again["next_cursor"] == cursor


def test_types_filter(live: TestClient, live_admin: dict[str, str]) -> None:
    after = start_cursor(live, live_admin)
    assert (
        live.post("/api/v1/sites", json={**SITE, "name": "Typed"}, headers=live_admin).status_code
        == 201
    )
    assert len(read_all(live, live_admin, after, at_least=1)[0]) == 1
    assert changes(live, live_admin, after=after, types="work_order,fixture")["items"] == []
    r = live.get("/api/v1/changes", params={"types": "site,spaceship"}, headers=live_admin)
    assert r.status_code == 422
    assert r.headers["content-type"].startswith("application/problem+json")
    assert r.json()["errors"][0]["field"] == "types"


def test_bad_and_expired_cursors(live: TestClient, live_admin: dict[str, str]) -> None:
    r = live.get("/api/v1/changes", params={"after": "not-a-cursor"}, headers=live_admin)
    assert r.status_code == 422 and r.json()["errors"][0]["field"] == "after"
    old = encode(Cursor(0, 1, int((utcnow() - timedelta(days=31)).timestamp())))
    r = live.get("/api/v1/changes", params={"after": old}, headers=live_admin)
    assert r.status_code == 410, r.text
    assert r.headers["content-type"].startswith("application/problem+json")
    recent = encode(Cursor(0, 1, int((utcnow() - timedelta(days=29)).timestamp())))
    assert (
        live.get("/api/v1/changes", params={"after": recent}, headers=live_admin).status_code == 200
    )


def test_rolled_back_write_leaves_no_change(live_factory: sessionmaker[Session]) -> None:
    with live_factory() as s:
        before = s.scalar(select(func.count()).select_from(Change))
        s.add(site("never committed"))
        s.flush()
        assert s.scalar(select(func.count()).select_from(Change)) == before + 1
        s.rollback()  # a crash halfway: the change goes with the write
        assert s.scalar(select(func.count()).select_from(Change)) == before


def test_prune_keeps_the_retention(live_factory: sessionmaker[Session]) -> None:
    now = utcnow()
    with live_factory() as s:
        row = {"resource_type": "site", "resource_id": 99, "kind": "created", "xact_id": 0}
        s.execute(
            insert(Change),
            [
                {**row, "changed_at": now - timedelta(days=31)},
                {**row, "changed_at": now - timedelta(days=29)},
            ],
        )
        s.commit()
        assert prune(s, now) >= 1
        s.commit()
        left = s.scalars(select(Change.changed_at).where(Change.resource_id == 99)).all()
    assert len(left) == 1 and left[0] > now - timedelta(days=30)
