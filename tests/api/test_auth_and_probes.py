"""API keys and scopes on every route; liveness and readiness probes."""

from __future__ import annotations

from pathlib import Path

import pytest
from fastapi.routing import iter_route_contexts
from fastapi.testclient import TestClient

from service.main import create_app


def test_probes_need_no_key(client: TestClient) -> None:
    assert client.get("/healthz").json() == {"status": "ok"}


def test_missing_wrong_and_underscoped_keys(client: TestClient, reader: dict[str, str]) -> None:
    r = client.get("/api/v1/sites")
    assert r.status_code == 401 and r.headers["content-type"].startswith("application/problem+json")
    assert r.headers["www-authenticate"] == "Bearer"
    r = client.get("/api/v1/sites", headers={"Authorization": "Bearer lk_not-a-key"})
    assert r.status_code == 401
    r = client.get("/api/v1/sites", headers={"Authorization": "Basic abc"})
    assert r.status_code == 401
    assert client.get("/api/v1/sites", headers=reader).status_code == 200
    r = client.post("/api/v1/sites", json={}, headers=reader)
    assert r.status_code == 403 and "write" in r.json()["detail"]


def test_every_api_route_demands_a_key() -> None:
    app = create_app(start_scheduler=False)
    checked = 0
    # iter_route_contexts: included routers are not flattened into app.routes any more.
    for route in iter_route_contexts(app.routes):
        path = route.path or ""
        if not path.startswith("/api/v1"):
            continue
        names = {d.call.__name__ for d in route.dependant.dependencies}
        assert "check" in names, f"{path} has no key check"
        checked += 1
    assert checked >= 60


def test_keys_admin_routes(
    client: TestClient, admin: dict[str, str], writer: dict[str, str]
) -> None:
    r = client.post("/api/v1/keys", json={"name": "cmms", "scope": "read"}, headers=admin)
    assert r.status_code == 201
    secret, key_id = r.json()["key"], r.json()["id"]
    assert (
        client.get("/api/v1/sites", headers={"Authorization": f"Bearer {secret}"}).status_code
        == 200
    )
    assert client.get("/api/v1/keys", headers=writer).status_code == 403
    assert all("key" not in k for k in client.get("/api/v1/keys", headers=admin).json())
    assert client.delete(f"/api/v1/keys/{key_id}", headers=admin).status_code == 200
    assert (
        client.get("/api/v1/sites", headers={"Authorization": f"Bearer {secret}"}).status_code
        == 401
    )


def test_home_page_carries_the_cautions(client: TestClient) -> None:
    r = client.get("/")
    assert r.status_code == 200 and "lock out" in r.text and "/docs" in r.text


def test_migrations_found_away_from_the_source_tree(
    tmp_path: Path, monkeypatch: pytest.MonkeyPatch
) -> None:
    """An installed package finds the migrations through LAMPKEEPER_MIGRATIONS_DIR."""
    from alembic import command
    from sqlalchemy import inspect

    from service.api import health
    from service.config import get_settings
    from service.db.session import make_engine

    real = health.ROOT / "migrations"
    monkeypatch.setattr(health, "ROOT", tmp_path / "site-packages")  # no alembic.ini there
    monkeypatch.setenv("LAMPKEEPER_MIGRATIONS_DIR", str(real))
    get_settings.cache_clear()
    try:
        cfg = health.alembic_config()
        assert cfg.get_main_option("script_location") == str(real)
        engine = make_engine(f"sqlite:///{tmp_path / 'installed.sqlite3'}")
        with engine.begin() as conn:
            cfg.attributes["connection"] = conn
            cfg.attributes["configure_logger"] = False
            command.upgrade(cfg, "head")
        assert "work_orders" in inspect(engine).get_table_names()
        engine.dispose()
    finally:
        get_settings.cache_clear()
