"""Sign a fresh user of a role in through the app and read the page CSRF token."""

from __future__ import annotations

import re

from fastapi.testclient import TestClient
from sqlalchemy.orm import Session

from service.users import service as users

PASSWORD = "correct horse battery"


def sign_in_as(client: TestClient, db: Session, role: str) -> str:
    """A new user of the role, signed in (cookies on the client); the page CSRF token."""
    n = db.info.setdefault("web_users", 0)
    db.info["web_users"] = n + 1
    name = f"{role[:4]}-{n}"
    users.create_user(db, name, name, role, PASSWORD)
    db.commit()
    client.cookies.clear()
    r = client.post(
        "/sign-in", data={"username": name, "password": PASSWORD}, follow_redirects=False
    )
    assert r.status_code == 303, r.text
    m = re.search(r'name="csrf_token" value="([^"]+)"', client.get("/app/runs").text)
    assert m
    return m.group(1)
