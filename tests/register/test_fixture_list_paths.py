"""The fixture list's prebuilt statements answer as the general paginate and the item reads.

GET /fixtures without a cursor runs statements built once per filter/sort shape
(repository.fixture_list_page); with a cursor it runs the general paginate over
as_rows(fixture_query(...)). Checked against two other paths of this service: the
general paginate on the same filters (rows, total, cursor), and GET /fixtures/{id} (the
ORM read of one fixture) for every listed item, body for body.
"""

from __future__ import annotations

from datetime import UTC, datetime
from typing import Any

import pytest
from fastapi.testclient import TestClient
from sqlalchemy.orm import Session

from service.api.pagination import PageParams, paginate
from service.register import repository as repo
from service.register.models import Fixture
from tests.factories import api_fixture, api_world

QUERIES: list[dict[str, Any]] = [
    {},
    {"include_retired": True},
    {"site_id": "SITE"},
    {"area_id": "YARD", "sort": "-tag"},
    {"lamp_type_id": "LED"},
    {"tag": "b-0", "include_retired": True},
    {"tag": "", "sort": "installed_on"},
    {"sort": "site_id,-id", "offset": 2},
    {"sort": "created_at", "external_reference": "ext-3"},
]


@pytest.fixture
def world(client: TestClient, writer: dict[str, str], db: Session) -> dict[str, Any]:
    w = api_world(client, writer)
    made = []
    for i in range(7):
        area = (w["hall"], w["yard"], w["annex"])[i % 3]
        lamp = (w["t8"], w["led"])[i % 2]
        made.append(
            api_fixture(
                client,
                writer,
                area["id"],
                lamp["id"],
                tag=f"{'AB'[i % 2]}-0{i}",
                lamps_per_fixture=1 + i % 3,
                external_reference=f"ext-{i}",
                **({"installed_on": f"2024-0{1 + i}-01"} if i % 2 else {}),
            )
        )
    row = db.get(Fixture, made[1]["id"])
    assert row is not None
    row.retired_at = datetime(2025, 1, 1, tzinfo=UTC)
    db.flush()
    return w


def _params(world: dict[str, Any], query: dict[str, Any]) -> dict[str, Any]:
    names = {"SITE": world["site"], "YARD": world["yard"], "LED": world["led"]}
    return {k: names[v]["id"] if v in names else v for k, v in query.items()}


@pytest.mark.parametrize("query", QUERIES)
def test_list_matches_general_paginate_and_item_reads(
    client: TestClient, reader: dict[str, str], db: Session, world: dict[str, Any], query: Any
) -> None:
    params = {**_params(world, query), "limit": 2}
    got = client.get("/api/v1/fixtures", params=params, headers=reader)
    assert got.status_code == 200, got.text
    body = got.json()
    filters = {k: v for k, v in params.items() if k not in ("limit", "offset", "sort")}
    filters.setdefault("include_retired", False)
    page = PageParams(limit=2, offset=params.get("offset", 0), sort=params.get("sort"))
    stmt = repo.as_rows(repo.fixture_query(**filters))
    rows, total = paginate(db, stmt, page, repo.FIXTURE_SORT, Fixture.id)
    assert body["total"] == total
    assert [item["id"] for item in body["items"]] == [r.id for r in rows]
    assert body["next_after"] == page.next_after
    for item in body["items"]:
        one = client.get(f"/api/v1/fixtures/{item['id']}", headers=reader).json()
        assert item == one


@pytest.mark.parametrize("sort", [None, "-tag", "site_id,-created_at"])
def test_cursor_walk_equals_offset_walk(
    client: TestClient, reader: dict[str, str], world: dict[str, Any], sort: str | None
) -> None:
    base = {"limit": 2, "include_retired": True, **({"sort": sort} if sort else {})}
    whole = client.get("/api/v1/fixtures", params={**base, "limit": 100}, headers=reader).json()
    by_offset, by_cursor = [], []
    for offset in range(0, whole["total"], 2):
        got = client.get("/api/v1/fixtures", params={**base, "offset": offset}, headers=reader)
        by_offset += got.json()["items"]
    after = None
    while True:
        params = {**base, **({"after": after} if after else {})}
        page = client.get("/api/v1/fixtures", params=params, headers=reader).json()
        by_cursor += page["items"]
        after = page["next_after"]
        if after is None:
            break
    assert by_offset == whole["items"] == by_cursor
    assert len(whole["items"]) == 7


def test_unknown_sort_field_is_422_naming_it(
    client: TestClient, reader: dict[str, str], world: dict[str, Any]
) -> None:
    got = client.get("/api/v1/fixtures", params={"sort": "location"}, headers=reader)
    assert got.status_code == 422 and "location" in got.text
