"""retirement instead of deletion for records with history

Adds retired_at to sites, areas, fixtures and lamp types, and turns the foreign keys of
history rows (removals, burn hours, voltages, burnout reports, work orders and lines,
weekly runs) from ON DELETE CASCADE into RESTRICT, so the database itself refuses to drop
history with a site, area, fixture or lamp position.

Revision ID: 0005
Revises: 0004
Create Date: 2026-12-02
"""

from collections.abc import Sequence

import sqlalchemy as sa
from alembic import op

revision: str = "0005"
down_revision: str | None = "0004"
branch_labels: str | Sequence[str] | None = None
depends_on: str | Sequence[str] | None = None

RETIRABLE = ("sites", "areas", "fixtures", "lamp_types")

# table -> [(column, referred table)] whose ON DELETE goes CASCADE -> RESTRICT.
HISTORY_KEYS: dict[str, list[tuple[str, str]]] = {
    "burnout_reports": [
        ("site_id", "sites"),
        ("area_id", "areas"),
        ("fixture_id", "fixtures"),
        ("position_id", "lamp_positions"),
    ],
    "lamp_removals": [
        ("site_id", "sites"),
        ("fixture_id", "fixtures"),
        ("position_id", "lamp_positions"),
    ],
    "burn_hour_records": [("area_id", "areas"), ("fixture_id", "fixtures")],
    "voltage_readings": [("site_id", "sites"), ("area_id", "areas"), ("fixture_id", "fixtures")],
    "work_orders": [("site_id", "sites"), ("area_id", "areas")],
    "work_order_lines": [("fixture_id", "fixtures")],
    "weekly_runs": [("site_id", "sites")],
}


def _sqlite_foreign_keys(on: bool) -> None:
    """SQLite: switch foreign-key enforcement around table rebuilds.

    A batch rebuild drops the old table, and with enforcement on that DROP runs the ON DELETE
    actions of the tables pointing at it (work_order_lines CASCADE, burnout_reports.removal_id
    and work_orders.run_id SET NULL) and would empty them. The pragma only takes effect
    between transactions, so the migration transaction is committed around it.
    """
    if op.get_bind().dialect.name != "sqlite":
        return
    op.execute("COMMIT")
    op.execute(f"PRAGMA foreign_keys={'ON' if on else 'OFF'}")
    op.execute("BEGIN")


def _check_sqlite_keys() -> None:
    """SQLite: fail the migration if a rebuild left a dangling reference."""
    if op.get_bind().dialect.name != "sqlite":
        return
    bad = op.get_bind().exec_driver_sql("PRAGMA foreign_key_check").fetchall()
    if bad:
        raise RuntimeError(f"foreign key check failed after the rebuild: {bad[:5]}")


def _set_on_delete(on_delete: str) -> None:
    """Recreate every history foreign key with the given ON DELETE action."""
    for table, keys in HISTORY_KEYS.items():
        with op.batch_alter_table(table, recreate="auto") as batch:
            for column, referred in keys:
                name = f"fk_{table}_{column}_{referred}"
                batch.drop_constraint(name, type_="foreignkey")
                batch.create_foreign_key(
                    name, referred, [column], ["id"], ondelete=on_delete
                )


def upgrade() -> None:
    for table in RETIRABLE:
        with op.batch_alter_table(table) as batch:
            batch.add_column(sa.Column("retired_at", sa.DateTime(timezone=True), nullable=True))
    _sqlite_foreign_keys(False)
    _set_on_delete("RESTRICT")
    _check_sqlite_keys()
    _sqlite_foreign_keys(True)


def downgrade() -> None:
    _sqlite_foreign_keys(False)
    _set_on_delete("CASCADE")
    for table in reversed(RETIRABLE):
        with op.batch_alter_table(table) as batch:
            batch.drop_column("retired_at")
    _check_sqlite_keys()
    _sqlite_foreign_keys(True)
