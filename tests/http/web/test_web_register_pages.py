"""Fixture register pages: search and paging, add and edit (stale forms), import, export."""

from __future__ import annotations

import re
from datetime import timedelta

from fastapi.testclient import TestClient
from sqlalchemy import func, select
from sqlalchemy.orm import Session

from service.db.base import utcnow
from service.register.models import Fixture, LampPosition
from tests.factories import plan_area, plan_fixtures, plan_lamp_type, plan_site
from tests.http.web.signin import sign_in_as


def _count(db: Session) -> int:
    return int(db.scalar(select(func.count()).select_from(Fixture)) or 0)


def test_search_filters_and_pages(client: TestClient, db: Session) -> None:
    s = plan_site(db)
    a1, a2 = plan_area(db, s), plan_area(db, s)
    lt = plan_lamp_type(db)
    first = plan_fixtures(db, a1, lt, 55, lamps=1)
    plan_fixtures(db, a2, lt, 3, lamps=1)
    db.commit()
    sign_in_as(client, db, "viewer")
    html = client.get(f"/app/fixtures?area_id={a1.id}").text
    assert "55 fixtures, page 1 of 2" in html
    assert html.count("/app/areas/") >= 50 and 'rel="next"' in html
    assert "/edit" not in html  # a viewer gets no edit links
    page2 = client.get(f"/app/fixtures?area_id={a1.id}&page=2").text
    assert "page 2 of 2" in page2 and 'rel="prev"' in page2
    tags = set(re.findall(r">(F-\d+)</a></th>", html)) | set(
        re.findall(r">(F-\d+)</a></th>", page2)
    )
    assert tags == {f.tag for f in first}  # the two pages hold the area's fixtures once
    one = client.get(f"/app/fixtures?site_id={s.id}&tag={first[0].tag}").text
    assert first[0].tag in one
    other_type = client.get(f"/app/fixtures?site_id={s.id}&lamp_type_id={plan_lamp_type(db).id}")
    assert "0 fixtures" in other_type.text
    assert client.get("/app/fixtures?site_id=abc&area_id=-1").status_code == 200  # ignored


def test_user_text_is_escaped(client: TestClient, db: Session) -> None:
    s = plan_site(db)
    a = plan_area(db, s)
    (fx,) = plan_fixtures(db, a, plan_lamp_type(db), 1, lamps=1)
    fx.tag = "<script>alert(1)</script>"
    db.commit()
    sign_in_as(client, db, "planner")
    html = client.get(f"/app/fixtures?site_id={s.id}").text
    assert "<script>alert(1)</script>" not in html
    assert "&lt;script&gt;alert(1)&lt;/script&gt;" in html
    edit = client.get(f"/app/fixtures/{fx.id}/edit").text
    assert "<script>alert" not in edit


def _form(token: str, area_id: int, lamp_type_id: int, **over: str) -> dict[str, str]:
    return {
        "csrf_token": token,
        "tag": "N-1",
        "location": "north wall",
        "area_id": str(area_id),
        "lamp_type_id": str(lamp_type_id),
        "lamps_per_fixture": "2",
        "ballast_kind": "",
        "measured_voltage_v": "",
        "installed_on": "",
        **over,
    }


def test_add_fixture_by_planner_and_refusals(client: TestClient, db: Session) -> None:
    s = plan_site(db)
    a = plan_area(db, s)
    lt = plan_lamp_type(db)
    db.commit()
    before = _count(db)
    for role in ("viewer", "technician"):
        token = sign_in_as(client, db, role)
        r = client.post("/app/fixtures/new", data=_form(token, a.id, lt.id))
        assert r.status_code == 403 and "may not" in r.text
    assert _count(db) == before
    token = sign_in_as(client, db, "planner")
    r = client.post("/app/fixtures/new", data=_form(token, a.id, lt.id), follow_redirects=False)
    assert r.status_code == 303, r.text
    db.expire_all()
    fx = db.scalars(select(Fixture).where(Fixture.tag == "N-1", Fixture.site_id == s.id)).one()
    assert len(db.scalars(select(LampPosition).where(LampPosition.fixture_id == fx.id)).all()) == 2
    # The same form again (a double tap): the tag is taken, a 409 naming it, no second row.
    r = client.post("/app/fixtures/new", data=_form(token, a.id, lt.id))
    assert r.status_code == 409 and "already has a fixture tagged" in r.text
    # A bad value names its field and writes nothing.
    r = client.post(
        "/app/fixtures/new", data=_form(token, a.id, lt.id, tag="N-2", measured_voltage_v="-5")
    )
    assert r.status_code == 422 and "measured_voltage_v" in r.text
    assert _count(db) == before + 1
    # Without the CSRF token nothing is written either.
    r = client.post("/app/fixtures/new", data=_form("", a.id, lt.id, tag="N-3"))
    assert r.status_code == 403 and "CSRF" in r.text
    assert _count(db) == before + 1


def test_edit_with_current_and_stale_version(client: TestClient, db: Session) -> None:
    s = plan_site(db)
    a = plan_area(db, s)
    lt = plan_lamp_type(db)
    (fx,) = plan_fixtures(db, a, lt, 1, lamps=2, installed_at=utcnow() - timedelta(weeks=3))
    db.commit()
    token = sign_in_as(client, db, "planner")
    form = client.get(f"/app/fixtures/{fx.id}/edit").text
    m = re.search(r'name="version" value="(\d+)"', form)
    assert m
    read_at = m.group(1)
    fields = _form(token, a.id, lt.id, tag=fx.tag, location="moved to bay 9", version=read_at)
    r = client.post(f"/app/fixtures/{fx.id}/edit", data=fields, follow_redirects=False)
    assert r.status_code == 303, r.text
    db.expire_all()
    got = db.get(Fixture, fx.id)
    assert got is not None and got.location == "moved to bay 9"
    assert got.version == int(read_at) + 1
    # A second person's form read at the old version: 409, the current values shown, no write.
    stale = _form(token, a.id, lt.id, tag=fx.tag, location="bay 1 again", version=read_at)
    r = client.post(f"/app/fixtures/{fx.id}/edit", data=stale)
    assert r.status_code == 409 and "Someone changed this fixture" in r.text
    assert 'value="moved to bay 9"' in r.text and f'name="version" value="{got.version}"' in r.text
    db.expire_all()
    assert db.get(Fixture, fx.id).location == "moved to bay 9"  # type: ignore[union-attr]
    # A technician's edit is refused whatever version it carries.
    tech = sign_in_as(client, db, "technician")
    r = client.post(
        f"/app/fixtures/{fx.id}/edit",
        data=_form(tech, a.id, lt.id, tag=fx.tag, version=str(got.version)),
    )
    assert r.status_code == 403
    assert client.get("/app/fixtures/999999/edit").status_code == 404


def _csv(site: str, area: str, lamp_type: str, rows: list[str]) -> bytes:
    head = "site,area,tag,lamp_type,lamps_per_fixture\n"
    return (head + "".join(f"{site},{area},{r}\n" for r in rows)).encode()


def test_import_bad_row_shows_its_error_and_writes_nothing(client: TestClient, db: Session) -> None:
    s = plan_site(db)
    a = plan_area(db, s)
    lt = plan_lamp_type(db)
    db.commit()
    before = _count(db)
    token = sign_in_as(client, db, "planner")
    body = _csv(s.name, a.name, lt.code, [f"I-1,{lt.code},2", f"I-2,{lt.code},zero"])
    r = client.post(
        "/app/fixtures/import",
        data={"csrf_token": token, "on_duplicate": "error"},
        files={"file": ("fx.csv", body, "text/csv")},
    )
    assert r.status_code == 422
    table = r.text[r.text.index('id="row-errors"') :]
    assert re.search(r"<td>3</td><td>lamps_per_fixture</td>", table)  # line 3 of the file
    assert _count(db) == before  # the good row was not written either
    good = _csv(s.name, a.name, lt.code, [f"I-1,{lt.code},2", f"I-2,{lt.code},1"])
    r = client.post(
        "/app/fixtures/import",
        data={"csrf_token": token, "on_duplicate": "error"},
        files={"file": ("fx.csv", good, "text/csv")},
    )
    assert r.status_code == 200 and "2 fixtures added" in r.text
    assert _count(db) == before + 2
    # The same file again is refused row by row (tags taken) and adds nothing.
    r = client.post(
        "/app/fixtures/import",
        data={"csrf_token": token, "on_duplicate": "error"},
        files={"file": ("fx.csv", good, "text/csv")},
    )
    assert r.status_code in (409, 422) and 'id="row-errors"' in r.text
    assert _count(db) == before + 2
    viewer = sign_in_as(client, db, "viewer")
    r = client.post(
        "/app/fixtures/import",
        data={"csrf_token": viewer},
        files={"file": ("fx.csv", good, "text/csv")},
    )
    assert r.status_code == 403


def test_export_download_is_the_import_format(client: TestClient, db: Session) -> None:
    s = plan_site(db)
    a = plan_area(db, s)
    fx = plan_fixtures(db, a, plan_lamp_type(db), 3, lamps=1)
    db.commit()
    sign_in_as(client, db, "viewer")
    r = client.get(f"/app/fixtures/export?area_id={a.id}")
    assert r.status_code == 200 and r.headers["content-type"].startswith("text/csv")
    lines = r.text.strip().splitlines()
    assert lines[0].startswith("site,area,tag,location,lamp_type")
    assert sorted(line.split(",")[2] for line in lines[1:]) == sorted(f.tag for f in fx)
