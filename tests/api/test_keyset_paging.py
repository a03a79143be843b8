"""Keyset paging (`after`): rows inserted between pages are never repeated nor dropped."""

from __future__ import annotations

from typing import Any

from fastapi.testclient import TestClient
from sqlalchemy.orm import Session

from service.api.pagination import decode_cursor, encode_cursor
from tests.factories import plan_site

PREFIX = "Keyset Yard"


def _site(db: Session, name: str) -> int:
    site = plan_site(db, name=f"{PREFIX} {name}")
    db.commit()
    return site.id


def _walk(
    client: TestClient, headers: dict[str, str], query: str, between: Any = None
) -> list[str]:
    """Every site name of a listing read with `after`, calling `between` after each page."""
    names: list[str] = []
    url = f"/api/v1/sites?limit=3&{query}"
    after = None
    while True:
        page = client.get(url + (f"&after={after}" if after else ""), headers=headers)
        assert page.status_code == 200, page.text
        body = page.json()
        names += [s["name"] for s in body["items"] if s["name"].startswith(PREFIX)]
        after = body["next_after"]
        if after is None:
            return names
        if between is not None:
            between(len(names))


def test_inserts_before_the_cursor_shift_offset_pages_but_not_keyset_pages(
    client: TestClient, db: Session, reader: dict[str, str]
) -> None:
    for name in ("m1", "m2", "m3", "m4", "m5", "m6", "m7", "m8"):
        _site(db, name)
    # Offset paging by name: a site sorting first, inserted after page one, repeats a row.
    first = client.get("/api/v1/sites?limit=3&offset=0&sort=name", headers=reader).json()
    _site(db, "a0")
    second = client.get("/api/v1/sites?limit=3&offset=3&sort=name", headers=reader).json()
    seen = [s["name"] for s in first["items"] + second["items"]]
    assert len(seen) != len(set(seen))  # the defect keyset paging removes

    inserted: list[str] = []

    def insert(served: int) -> None:
        # One before every row served so far (they sort first) and one after all of them.
        for name in (f"a{served:03d}", f"z{served:03d}"):
            _site(db, name)
            inserted.append(f"{PREFIX} {name}")

    names = _walk(client, reader, "sort=name", between=insert)
    assert len(names) == len(set(names))  # nothing twice
    originals = [f"{PREFIX} m{i}" for i in range(1, 9)]
    assert set(originals) <= set(names)  # nothing dropped
    # Rows inserted behind the cursor are not served; those ahead of it all are.
    assert {n for n in inserted if " z" in n} <= set(names)
    assert not {n for n in inserted if " a" in n} & set(names)
    assert names == sorted(names)


def test_default_order_by_id_serves_new_rows_once(
    client: TestClient, db: Session, reader: dict[str, str]
) -> None:
    for i in range(7):
        _site(db, f"id{i}")
    added: list[str] = []

    def insert(served: int) -> None:
        name = f"new{served}"
        _site(db, name)
        added.append(f"{PREFIX} {name}")

    names = _walk(client, reader, "", between=insert)
    assert len(names) == len(set(names))
    assert set(added) <= set(names)  # new ids sort last: each is served, once


def test_ties_in_the_sort_field_are_broken_by_id(
    client: TestClient, db: Session, reader: dict[str, str]
) -> None:
    # Ten sites sharing one voltage: only the id orders them.
    ids = [plan_site(db, name=f"{PREFIX} tie{i}", nominal_voltage_v=277.0).id for i in range(10)]
    db.commit()
    got: list[int] = []
    after = None
    while True:
        q = "limit=4&sort=-nominal_voltage_v" + (f"&after={after}" if after else "")
        body = client.get(f"/api/v1/sites?{q}", headers=reader).json()
        got += [s["id"] for s in body["items"] if s["nominal_voltage_v"] == 277.0]
        after = body["next_after"]
        if after is None:
            break
    assert got == sorted(ids)


def test_a_cursor_is_bound_to_its_sort_and_checked(
    client: TestClient, db: Session, reader: dict[str, str]
) -> None:
    for i in range(3):
        _site(db, f"c{i}")
    page = client.get("/api/v1/sites?limit=1&sort=name", headers=reader).json()
    cursor = page["next_after"]
    assert decode_cursor(cursor)[0] == "name"
    other = client.get(f"/api/v1/sites?limit=1&sort=id&after={cursor}", headers=reader)
    assert other.status_code == 422
    assert other.headers["content-type"] == "application/problem+json"
    assert other.json()["errors"][0]["field"] == "after"
    for bad in ("not-a-cursor", encode_cursor("name", [1, 2, 3]), encode_cursor("name", [None, 1])):
        answer = client.get(f"/api/v1/sites?limit=1&sort=name&after={bad}", headers=reader)
        assert answer.status_code == 422, bad
        assert answer.json()["errors"][0] == {**answer.json()["errors"][0], "field": "after"}
