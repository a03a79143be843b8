"""Down to 0003 and back to head on a fresh database: the register's rows survive both ways.

Every migration after 0003 must have a real downgrade that keeps the data of the tables it
does not own (sites, areas, lamp types, fixtures), and the upgrade must take that data back.
Runs on SQLite (a temp file; batch mode copies tables) and on PostgreSQL (a scratch database).
"""

from __future__ import annotations

import os
from collections.abc import Iterator
from pathlib import Path

import pytest
from alembic import command
from sqlalchemy import Engine, text
from sqlalchemy.engine import make_url
from sqlalchemy.orm import Session

from service.api.health import alembic_config
from service.catalogue.models import LampType
from service.db.session import make_engine
from service.register.models import Area, Fixture, Site

BASE_REVISION = "0003"  # the oldest revision the service can still be taken back to


@pytest.fixture()
def fresh_engine(tmp_path: Path) -> Iterator[Engine]:
    """An engine on an empty database of its own (SQLite file or PostgreSQL scratch)."""
    url = os.environ.get("TEST_DATABASE_URL") or ""
    if not url.startswith("postgresql"):
        eng = make_engine(f"sqlite:///{tmp_path / 'roundtrip.sqlite3'}")
        yield eng
        eng.dispose()
        return
    base = make_url(url)
    name = f"scratch_roundtrip_{os.getpid()}"
    admin = make_engine(base.set(database="postgres").render_as_string(hide_password=False))
    with admin.connect().execution_options(isolation_level="AUTOCOMMIT") as conn:
        conn.execute(text(f'DROP DATABASE IF EXISTS "{name}"'))
        conn.execute(text(f'CREATE DATABASE "{name}"'))
    eng = make_engine(base.set(database=name).render_as_string(hide_password=False))
    try:
        yield eng
    finally:
        eng.dispose()
        with admin.connect().execution_options(isolation_level="AUTOCOMMIT") as conn:
            conn.execute(text(f'DROP DATABASE IF EXISTS "{name}" WITH (FORCE)'))
        admin.dispose()


def _alembic(engine: Engine, step: str, revision: str) -> None:
    """Run `alembic upgrade|downgrade revision` as the console script does (own engine)."""
    cfg = alembic_config()
    cfg.attributes["configure_logger"] = False
    cfg.set_main_option(
        "sqlalchemy.url", engine.url.render_as_string(hide_password=False).replace("%", "%%")
    )
    getattr(command, step)(cfg, revision)


def _register_rows(engine: Engine) -> list[tuple[object, ...]]:
    """Site, area, lamp type and fixture of the test, read with plain SQL (any revision)."""
    with engine.connect() as conn:
        return [
            tuple(r)
            for r in conn.execute(
                text(
                    "SELECT s.name, a.name, t.code, t.rated_life_h, f.tag"
                    " FROM fixtures f JOIN areas a ON a.id = f.area_id"
                    " JOIN sites s ON s.id = a.site_id JOIN lamp_types t ON t.id = f.lamp_type_id"
                )
            )
        ]


def _revision(engine: Engine) -> str:
    with engine.connect() as conn:
        return str(conn.execute(text("SELECT version_num FROM alembic_version")).scalar_one())


def test_register_rows_survive_downgrade_and_upgrade(fresh_engine: Engine) -> None:
    _alembic(fresh_engine, "upgrade", "head")
    head = _revision(fresh_engine)
    with Session(fresh_engine) as db:
        site = Site(
            name="Roundtrip Works",
            time_zone="Europe/Berlin",
            nominal_voltage_v=230,
            currency="EUR",
            energy_price_per_kwh=0.25,
            labour_rate_per_h=40.0,
        )
        area = Area(site=site, name="Press Hall", access_method="lift")
        lamp = LampType(
            code="RT-T8",
            technology="linear_fluorescent",
            rated_watts=58,
            rated_volts=230,
            rated_life_h=24000,
        )
        db.add_all([site, area, lamp])
        db.flush()
        db.add(Fixture(site_id=site.id, area_id=area.id, lamp_type_id=lamp.id, tag="RT-001"))
        db.commit()
    expected = [("Roundtrip Works", "Press Hall", "RT-T8", 24000, "RT-001")]
    assert _register_rows(fresh_engine) == expected

    _alembic(fresh_engine, "downgrade", BASE_REVISION)
    assert _revision(fresh_engine) == BASE_REVISION
    assert _register_rows(fresh_engine) == expected

    _alembic(fresh_engine, "upgrade", "head")
    assert _revision(fresh_engine) == head
    assert _register_rows(fresh_engine) == expected
    with Session(fresh_engine) as db:  # the head models read the rows back too
        fixture = db.query(Fixture).one()
        assert (fixture.tag, fixture.area.site.name) == ("RT-001", "Roundtrip Works")
