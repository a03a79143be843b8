"""Pages through the app: sign-in redirects, CSRF, role refusals, escaping, lock-out."""

from __future__ import annotations

import re

from fastapi.testclient import TestClient
from sqlalchemy.orm import Session

from service.users import service as users

PASSWORD = "correct horse battery"


def _user(db: Session, name: str, role: str) -> None:
    users.create_user(db, name, name.title(), role, PASSWORD)
    db.flush()


def _sign_in(client: TestClient, name: str) -> str:
    r = client.post(
        "/sign-in", data={"username": name, "password": PASSWORD}, follow_redirects=False
    )
    assert r.status_code == 303, r.text
    page = client.get("/app/report")
    m = re.search(r'name="csrf_token" value="([^"]+)"', page.text)
    assert m
    return m.group(1)


def test_pages_redirect_to_sign_in(client: TestClient) -> None:
    r = client.get("/app/work-orders?state=draft", follow_redirects=False)
    assert r.status_code == 303
    assert r.headers["location"].startswith("/sign-in?next=%2Fapp%2Fwork-orders")


def test_cookie_flags_and_overview(client: TestClient, db: Session) -> None:
    _user(db, "tess", "technician")
    r = client.post(
        "/sign-in", data={"username": "tess", "password": PASSWORD}, follow_redirects=False
    )
    cookie = r.headers["set-cookie"].lower()
    assert "httponly" in cookie and "samesite=lax" in cookie
    assert client.get("/app").status_code == 200


def test_post_without_csrf_refused(client: TestClient, db: Session) -> None:
    _user(db, "tom", "technician")
    _sign_in(client, "tom")
    r = client.post("/app/report", data={"position_id": "1", "csrf_token": "forged"})
    assert r.status_code == 403
    assert "CSRF" in r.text


def test_viewer_forged_post_refused(client: TestClient, db: Session) -> None:
    _user(db, "vera", "viewer")
    token = _sign_in(client, "vera")
    r = client.post("/app/report", data={"position_id": "1", "csrf_token": token})
    assert r.status_code == 403
    assert "may not" in r.text


def test_lockout_after_failures(client: TestClient, db: Session) -> None:
    _user(db, "lou", "planner")
    for _ in range(users.ACCOUNT_LIMIT):
        r = client.post("/sign-in", data={"username": "lou", "password": "wrong password"})
        assert r.status_code == 401
    r = client.post("/sign-in", data={"username": "lou", "password": PASSWORD})
    assert r.status_code == 429
    assert "Too many" in r.text


def test_sign_out_ends_session(client: TestClient, db: Session) -> None:
    _user(db, "sam", "administrator")
    token = _sign_in(client, "sam")
    assert (
        client.post("/sign-out", data={"csrf_token": token}, follow_redirects=False).status_code
        == 303
    )
    assert client.get("/app", follow_redirects=False).status_code == 303


def test_unknown_tag_is_escaped(client: TestClient, db: Session) -> None:
    _user(db, "eve", "technician")
    _sign_in(client, "eve")
    r = client.get("/f/1/%3Cscript%3Ealert(1)%3C%5Cscript%3E")
    assert r.status_code == 404
    assert "<script>alert" not in r.text
    assert "&lt;script&gt;" in r.text
