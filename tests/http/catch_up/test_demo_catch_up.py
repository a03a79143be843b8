"""The demo: the parking structure's due levels share lift visits; the office run makes drafts."""

from __future__ import annotations

from collections import defaultdict
from pathlib import Path

import pytest
from fastapi.testclient import TestClient
from sqlalchemy import select
from sqlalchemy.orm import Session

from service.register.models import Area, Site
from service.seed.loader import load_demo

API = "/api/v1"


def _site_id(db: Session, word: str) -> int:
    return int(db.scalar(select(Site.id).where(Site.name.contains(word))) or 0)


def test_demo_parking_levels_share_one_lift_visit_a_week(
    client: TestClient, db: Session, writer: dict[str, str], tmp_path: Path
) -> None:
    load_demo(db, key_file=tmp_path / "key.txt")
    db.commit()
    sid = _site_id(db, "Parking")
    body = client.get(f"{API}/sites/{sid}/relamp-plan", headers=writer).json()
    cap = body["weekly_labour_h_capacity"]
    weeks: dict[int, list[dict]] = defaultdict(list)
    for a in body["areas"]:
        if a["catch_up"] is not None:
            weeks[a["catch_up"]["week"]].append({**a["catch_up"], "area_id": a["area_id"]})
    hire = dict(db.execute(select(Area.id, Area.equipment_hire_per_visit)).tuples().all())
    assert len(weeks) >= 2  # more due than a week's labour: spread over the coming weeks
    for slots in weeks.values():
        assert sum(s["labour_h"] for s in slots) <= cap  # the capacity holds
        paying = [s for s in slots if s["shares_visit_with_area_id"] is None]
        assert len(paying) == 1  # one lift visit a week, however many levels
        # One hire a week: the visit costs its dearest job's hire (a joining level with a
        # dearer lift pays only the difference), never one hire per level.
        assert len(slots) >= 2
        charged = sum(s["hire_charged"] for s in slots)
        assert charged == pytest.approx(max(hire[s["area_id"]] for s in slots))
    # The weekly run orders this week's levels; one order pays the lift, the rest share it.
    r = client.post(f"{API}/sites/{sid}/runs", headers=writer)
    assert r.status_code == 201, r.text
    orders = client.get(f"{API}/work-orders?site_id={sid}&kind=group_relamp", headers=writer)
    shared = [o["plan"]["catch_up"]["shares_visit_with_area_id"] for o in orders.json()["items"]]
    assert len(shared) == len(weeks[0]) and shared.count(None) == 1


def test_demo_office_run_makes_draft_orders(
    client: TestClient, db: Session, writer: dict[str, str], tmp_path: Path
) -> None:
    load_demo(db, key_file=tmp_path / "key.txt")
    db.commit()
    sid = _site_id(db, "Office")
    r = client.post(f"{API}/sites/{sid}/runs", headers=writer)
    assert r.status_code == 201, r.text
    items = client.get(f"{API}/work-orders?site_id={sid}", headers=writer).json()["items"]
    assert items and {o["state"] for o in items} == {"draft"}
