"""A weekly run's orders all reach the feed (a `changed_since` poll missed every one),
and the console commands prune the feed and deliver webhooks."""

from __future__ import annotations

import time
from datetime import timedelta
from typing import Any

import pytest
from fastapi.testclient import TestClient
from sqlalchemy import func, insert, select
from sqlalchemy.orm import Session, sessionmaker

from service import cli
from service.changes.models import Change
from service.db import session as session_mod
from service.db.base import utcnow
from service.scheduling.runner import run_site_week
from tests.changes.test_slow_writer import start_cursor
from tests.factories import plan_area, plan_fixtures, plan_lamp_type, plan_site


def test_weekly_run_orders_and_lines_are_in_the_feed(
    live: TestClient, live_admin: dict[str, str], live_factory: sessionmaker[Session]
) -> None:
    with live_factory() as s:
        site = plan_site(s, name="Feed Run Site")
        plan_fixtures(
            s, plan_area(s, site), plan_lamp_type(s, code="FEED-T8"), 3, hours_at_install=20_000.0
        )
        s.commit()
        sid = site.id
    after = start_cursor(live, live_admin)
    run = run_site_week(live_factory, sid, week="2026-W49", trigger="cli")
    assert run.outcome == "succeeded" and run.orders_created >= 1
    items: list[dict[str, Any]] = []
    cursor = after
    deadline = time.monotonic() + 60
    while time.monotonic() < deadline:  # PostgreSQL shows it once older transactions end
        page = live.get(
            "/api/v1/changes",
            params={
                "types": "work_order,work_order_line,weekly_run",
                "limit": 1000,
                **({"after": cursor} if cursor else {}),
            },
            headers=live_admin,
        ).json()
        items += page["items"]
        cursor = page["next_cursor"]
        if any(
            c["resource_type"] == "weekly_run" and c["body"]["outcome"] == "succeeded"
            for c in items
        ):
            break
        time.sleep(0.2)
    orders = {
        c["resource_id"]
        for c in items
        if c["resource_type"] == "work_order" and c["kind"] == "created"
    }
    lines = [c for c in items if c["resource_type"] == "work_order_line"]
    assert len(orders) == run.orders_created
    assert lines and {c["body"]["work_order_id"] for c in lines} <= orders


def test_cli_prune_and_deliver(
    live_factory: sessionmaker[Session],
    monkeypatch: pytest.MonkeyPatch,
    capsys: pytest.CaptureFixture[str],
) -> None:
    monkeypatch.setattr(session_mod, "session_factory", lambda engine=None: live_factory)
    with live_factory() as s:
        s.execute(
            insert(Change),
            [
                {
                    "resource_type": "site",
                    "resource_id": 4242,
                    "kind": "created",
                    "xact_id": 0,
                    "changed_at": utcnow() - timedelta(days=45),
                }
            ],
        )
        s.commit()
    assert cli.main(["changes", "prune"]) == 0
    assert "changes pruned" in capsys.readouterr().out
    with live_factory() as s:
        left = s.scalar(select(func.count()).select_from(Change).where(Change.resource_id == 4242))
    assert left == 0
    assert cli.main(["webhooks", "deliver", "--once"]) == 0
    assert "claimed" in capsys.readouterr().out
