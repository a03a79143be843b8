"""Migration 0005 on a filled SQLite file: history survives the rebuilds, up and down.

The rebuild of a table on SQLite drops the old one; with foreign keys enforced that DROP
would run the ON DELETE actions of the tables pointing at it (SQLite documentation,
"DROP TABLE" in foreignkeys.html), so this checks the rows and links are all still there.
"""

from __future__ import annotations

from datetime import UTC, date, datetime
from pathlib import Path
from typing import Any

import pytest
from alembic import command
from sqlalchemy import JSON, Boolean, Date, DateTime, Engine, Float, Integer, MetaData, text
from sqlalchemy.exc import IntegrityError

from service.api.health import alembic_config
from service.db.session import make_engine

NOW = datetime(2025, 6, 1, tzinfo=UTC)


def _migrate(engine: Engine, revision: str, down: bool = False) -> None:
    cfg = alembic_config()
    cfg.attributes["configure_logger"] = False
    with engine.begin() as conn:
        cfg.attributes["connection"] = conn
        (command.downgrade if down else command.upgrade)(cfg, revision)


def _filler(col: Any) -> Any:
    """A value for a NOT NULL column the test does not care about."""
    t = col.type
    if isinstance(t, Boolean):
        return False
    if isinstance(t, Integer):
        return 1
    if isinstance(t, Float):
        return 1.0
    if isinstance(t, DateTime):
        return NOW
    if isinstance(t, Date):
        return date(2025, 6, 1)
    if isinstance(t, JSON):
        return []
    return "x"


def _insert(engine: Engine, table: str, **values: Any) -> int:
    """Insert one row into the table as it is now (reflected), filling required columns."""
    meta = MetaData()
    meta.reflect(engine, only=[table])
    t = meta.tables[table]
    row = {
        c.name: _filler(c)
        for c in t.columns
        if not c.nullable and c.server_default is None and not c.primary_key
    }
    row.update(values)
    with engine.begin() as conn:
        return int(conn.execute(t.insert().values(**row)).inserted_primary_key[0])


def _counts(engine: Engine) -> dict[str, Any]:
    with engine.connect() as conn:
        return {
            "rows": {
                t: conn.execute(text(f"SELECT count(*) FROM {t}")).scalar()
                for t in ("work_order_lines", "burnout_reports", "work_orders", "lamp_removals")
            },
            "links": conn.execute(
                text(
                    "SELECT removal_id FROM burnout_reports UNION ALL SELECT run_id FROM work_orders"
                )
            )
            .scalars()
            .all(),
            "index": conn.execute(
                text("SELECT sql FROM sqlite_master WHERE name = 'uq_work_orders_open_group_area'")
            ).scalar(),
        }


def test_0005_keeps_history_and_links_on_sqlite(tmp_path: Path) -> None:
    engine = make_engine(f"sqlite:///{tmp_path / 'm.sqlite3'}")
    try:
        _migrate(engine, "0004")
        site = _insert(engine, "sites", name="Old Works", time_zone="UTC")
        area = _insert(engine, "areas", site_id=site, name="Hall", access_method="ladder")
        lt = _insert(engine, "lamp_types", code="T-1", technology="incandescent")
        fix = _insert(engine, "fixtures", site_id=site, area_id=area, tag="F1", lamp_type_id=lt)
        pos = _insert(engine, "lamp_positions", fixture_id=fix, position_no=1)
        rem = _insert(
            engine, "lamp_removals", site_id=site, fixture_id=fix, position_id=pos, lamp_type_id=lt
        )
        _insert(
            engine,
            "burnout_reports",
            site_id=site,
            area_id=area,
            fixture_id=fix,
            position_id=pos,
            removal_id=rem,
            status="closed",
        )
        run = _insert(engine, "weekly_runs", site_id=site, iso_week="2025-W22")
        order = _insert(
            engine,
            "work_orders",
            site_id=site,
            area_id=area,
            run_id=run,
            kind="group_relamp",
            state="issued",
        )
        _insert(
            engine,
            "work_order_lines",
            work_order_id=order,
            fixture_id=fix,
            lamp_type_id=lt,
            position_ids=[pos],
            position_nos=[1],
        )
        before = _counts(engine)
        assert before["rows"] == {
            "work_order_lines": 1,
            "burnout_reports": 1,
            "work_orders": 1,
            "lamp_removals": 1,
        }
        assert before["index"] is not None and "WHERE" in before["index"]

        _migrate(engine, "0005")
        assert _counts(engine) == before
        with engine.connect() as conn:
            assert conn.execute(text("PRAGMA foreign_keys")).scalar() == 1
            # RESTRICT now: the site's history stops its delete at the database.
            with pytest.raises(IntegrityError):
                conn.execute(text("DELETE FROM sites WHERE id = :i"), {"i": site})
            conn.rollback()

        _migrate(engine, "0004", down=True)
        assert _counts(engine) == before
    finally:
        engine.dispose()
