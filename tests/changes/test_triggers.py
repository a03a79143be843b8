"""Every tracked table keeps its change triggers after `alembic upgrade head`.

Later migrations that rebuild a table in SQLite batch mode drop its triggers; this test
catches that, and a SQLite trigger that misses a column the table has gained.
"""

from __future__ import annotations

import importlib.util
import json
from pathlib import Path
from types import ModuleType

from sqlalchemy import Engine, inspect, text

from service.changes.schemas import ResourceType

ROOT = Path(__file__).resolve().parents[2]


def load_changes_migration() -> ModuleType:
    """The 0011 migration module, loaded by path (its name starts with a digit)."""
    path = ROOT / "migrations" / "versions" / "0011_changes.py"
    spec = importlib.util.spec_from_file_location("changes_0011", path)
    assert spec is not None and spec.loader is not None
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module


def test_migration_tracks_the_feed_resource_types() -> None:
    mig = load_changes_migration()
    assert {rtype for rtype, _ in mig.TRACKED.values()} == {t.value for t in ResourceType}


def test_every_tracked_table_has_its_triggers(engine: Engine) -> None:
    mig = load_changes_migration()
    with engine.connect() as conn:
        if engine.dialect.name == "postgresql":
            rows = conn.execute(
                text(
                    "SELECT event_object_table, trigger_name, event_manipulation "
                    "FROM information_schema.triggers"
                )
            ).all()
            found = {(t, n) for t, n, _ in rows}
            bodies: dict[str, str] = {}
        else:
            rows = conn.execute(
                text("SELECT tbl_name, name, sql FROM sqlite_master WHERE type = 'trigger'")
            ).all()
            found = {(t, n) for t, n, _ in rows}
            bodies = {n: sql for _, n, sql in rows}
        missing = [
            (table, mig.trigger_name(table, op))
            for table in mig.TRACKED
            for op in mig.OPS
            if (table, mig.trigger_name(table, op)) not in found
        ]
        assert missing == [], f"change triggers missing (re-create them): {missing}"
        if engine.dialect.name == "sqlite":
            cols = {t: [c["name"] for c in inspect(conn).get_columns(t)] for t in mig.TRACKED}
            stale = [
                (table, col)
                for table in mig.TRACKED
                for col in cols[table]
                if f"'{col}'" not in bodies[mig.trigger_name(table, "insert")]
                or f"'{col}'" not in bodies[mig.trigger_name(table, "update")]
            ]
            assert stale == [], f"SQLite change triggers miss columns (re-create): {stale}"


def test_postgresql_bodies_are_the_rows_as_json_in_id_order(engine: Engine) -> None:
    """The "json" form (migration 0019): one change per row of a multi-row insert, in id
    order, each body the row read back as a JSON value (json columns included)."""
    if engine.dialect.name != "postgresql":
        return  # SQLite's row triggers are unchanged (checked above)
    with engine.connect() as conn:
        tx = conn.begin()
        try:
            src = conn.execute(
                text("SELECT prosrc, proconfig FROM pg_proc WHERE proname = :n"),
                {"n": load_changes_migration().trigger_name("lamp_types", "insert")},
            ).one()
            assert "row_to_json(n)" in src[0] and any("work_mem" in c for c in src[1])
            ids = (
                conn.execute(
                    text(
                        "INSERT INTO lamp_types (code, technology, rated_watts, rated_volts, "
                        "rated_life_h, rated_percentile, unit_price, contains_mercury, rupture_risk, "
                        "lumen_basis, mortality_points) SELECT 'TRG-' || g, 'halogen', 50, 230, "
                        "2000 + g, 50, 1.5, false, false, 'hours', "
                        "CAST('[[50, 90], [100, 50]]' AS json) FROM generate_series(1, 40) g "
                        "RETURNING id"
                    )
                )
                .scalars()
                .all()
            )
            rows = conn.execute(
                text(
                    "SELECT resource_id, body::text FROM changes WHERE resource_type = "
                    "'lamp_type' AND resource_id = ANY(:ids) ORDER BY id"
                ),
                {"ids": list(ids)},
            ).all()
            assert [r[0] for r in rows] == sorted(ids)  # change ids follow the row ids
            want = conn.execute(
                text("SELECT id, to_jsonb(t)::text FROM lamp_types t WHERE id = ANY(:ids)"),
                {"ids": list(ids)},
            ).all()
            by_id = {i: json.loads(b) for i, b in want}
            for rid, body in rows:
                got = json.loads(body)
                assert got == by_id[rid] and got["mortality_points"] == [[50, 90], [100, 50]]
        finally:
            tx.rollback()
