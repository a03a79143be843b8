"""Liveness and readiness probes (no API key needed)."""

from __future__ import annotations

from pathlib import Path
from typing import Any

from alembic.config import Config
from alembic.runtime.migration import MigrationContext
from alembic.script import ScriptDirectory
from fastapi import APIRouter
from fastapi.responses import JSONResponse
from sqlalchemy import Engine, text

from service.config import get_settings
from service.db.session import get_engine

router = APIRouter(tags=["probes"])

ROOT = Path(__file__).resolve().parents[2]


def alembic_config() -> Config:
    """Alembic configuration pointing at the project's migrations."""
    folder = Path(get_settings().migrations_dir or ROOT / "migrations")
    # alembic.ini only configures logging; the script location is what matters.
    ini = ROOT / "alembic.ini"
    cfg = Config(str(ini)) if ini.exists() else Config()
    cfg.set_main_option("script_location", str(folder))
    return cfg


def migration_state(engine: Engine) -> tuple[str | None, str | None]:
    """(revision the database is at, newest revision in the code)."""
    head = ScriptDirectory.from_config(alembic_config()).get_current_head()
    with engine.connect() as conn:
        current = MigrationContext.configure(conn).get_current_revision()
    return current, head


@router.get("/healthz")
def healthz() -> dict[str, str]:
    """Alive: the process answers."""
    return {"status": "ok"}


@router.get("/readyz", response_model=None)
def readyz() -> Any:
    """Ready: the database answers and its schema is at the newest migration."""
    engine = get_engine()
    try:
        with engine.connect() as conn:
            conn.execute(text("SELECT 1"))
        current, head = migration_state(engine)
    except Exception as exc:
        return JSONResponse(
            {"status": "unavailable", "database": f"unreachable: {type(exc).__name__}"},
            status_code=503,
        )
    body = {"status": "ok", "database": "ok", "migration": current, "expected": head}
    if current != head:
        body["status"] = "migrations pending"
        return JSONResponse(body, status_code=503)
    return body
