"""the change feed and webhook subscriptions

Revision ID: 0011
Revises: 0010
Create Date: 2026-12-02

Every insert, update and delete on the tracked tables writes a row to `changes` in the
same transaction, from database triggers (so no code path can forget it):

- PostgreSQL: statement-level triggers with transition tables, one function per table and
  operation, stamping each row with `pg_current_xact_id()`; the feed reads only rows whose
  transaction is below `pg_snapshot_xmin(pg_current_snapshot())` (all finished).
- SQLite: row triggers; one writer at a time, so ids follow commit order (xact_id is 0).

NOTE for later migrations: SQLite batch mode (`op.batch_alter_table`) rebuilds a table by
copy, drop and rename, which DROPS its triggers; and the SQLite triggers list the table's
columns, so a new column is missing from the change body until they are re-made. A
migration that alters a tracked table must end by re-making them (this module's name
starts with a digit: load it by path):

    import importlib.util, pathlib
    path = pathlib.Path(__file__).with_name("0011_changes.py")
    spec = importlib.util.spec_from_file_location("changes_0011", path)
    feed = importlib.util.module_from_spec(spec); spec.loader.exec_module(feed)
    feed.create_triggers(op, ["fixtures"])  # drops and re-creates that table's triggers

tests/changes/test_triggers.py fails when a tracked table lacks its triggers or when a
SQLite trigger misses one of its table's columns.
"""

from collections.abc import Sequence
from typing import Any

import sqlalchemy as sa
from alembic import op

revision: str = "0011"
down_revision: str | None = "0010"
branch_labels: str | Sequence[str] | None = None
depends_on: str | Sequence[str] | None = None

# table -> (resource type in the feed, the column whose change is a "state_changed")
TRACKED: dict[str, tuple[str, str | None]] = {
    "sites": ("site", None),
    "areas": ("area", None),
    "fixtures": ("fixture", None),
    "lamp_positions": ("lamp_position", None),
    "lamp_types": ("lamp_type", None),
    "burnout_reports": ("burnout_report", "status"),
    "work_orders": ("work_order", "state"),
    "work_order_lines": ("work_order_line", "outcome"),
    "weekly_runs": ("weekly_run", "outcome"),
}
# Columns whose change alone is no change for a consumer (run heartbeats, touch times).
IGNORED = ("updated_at", "heartbeat_at", "lease_expires_at")
OPS = ("insert", "update", "delete")


def trigger_name(table: str, operation: str) -> str:
    """The name of a tracked table's change trigger for one operation."""
    return f"lk_changes_{table}_{operation}"


def _columns(bind: Any, table: str) -> list[tuple[str, bool]]:
    """(name, is_json) of a table's columns as the database has them now."""
    cols = sa.inspect(bind).get_columns(table)
    return [(c["name"], isinstance(c["type"], sa.JSON)) for c in cols]


def _pg_kind(table: str, alias_new: str, alias_old: str) -> str:
    state = TRACKED[table][1]
    cols = {name for name, _ in _columns(op.get_bind(), table)}
    parts = []
    if "retired_at" in cols:
        parts.append(
            f"WHEN {alias_old}.retired_at IS NULL AND {alias_new}.retired_at IS NOT NULL "
            "THEN 'retired'"
        )
    if state is not None:
        parts.append(
            f"WHEN {alias_old}.{state} IS DISTINCT FROM {alias_new}.{state} THEN 'state_changed'"
        )
    if not parts:
        return "'updated'"
    return "CASE " + " ".join(parts) + " ELSE 'updated' END"


# The PostgreSQL function form. "json" (since migration 0019): the body is row_to_json(n),
# the column's own type (to_jsonb(n) cast back to json cost about three times as much per
# row), and the function runs with a work_mem that keeps the sort of a bulk insert's rows
# (tens of thousands of order lines in a weekly run) in memory. "jsonb": the form this
# migration first made (0019's downgrade restores it). Same rows, ids, kinds and bodies as
# JSON values in both; the update trigger still compares jsonb (json has no equality).
PG_FORM = "json"
PG_WORK_MEM = "64MB"


def _pg_create(table: str, form: str | None = None) -> None:
    form = form or PG_FORM
    rtype = TRACKED[table][0]
    cols = {name for name, _ in _columns(op.get_bind(), table)}
    ver_n = "n.version" if "version" in cols else "NULL::integer"
    ver_o = "o.version" if "version" in cols else "NULL::integer"
    minus = "".join(f" - '{c}'" for c in IGNORED)
    head = (
        "INSERT INTO changes (xact_id, changed_at, resource_type, resource_id, kind, version, body)"
    )
    xact = "pg_current_xact_id()::text::bigint"
    body = "row_to_json(n)" if form == "json" else "to_jsonb(n)"
    bodies = {
        "insert": f"{head} SELECT {xact}, now(), '{rtype}', n.id, 'created', {ver_n}, "
        f"{body} FROM new_rows n ORDER BY n.id",
        "update": f"{head} SELECT {xact}, now(), '{rtype}', n.id, {_pg_kind(table, 'n', 'o')}, "
        f"{ver_n}, {body} FROM new_rows n JOIN old_rows o ON o.id = n.id "
        f"WHERE (to_jsonb(n){minus}) IS DISTINCT FROM (to_jsonb(o){minus}) ORDER BY n.id",
        "delete": f"{head} SELECT {xact}, now(), '{rtype}', o.id, 'deleted', {ver_o}, NULL "
        "FROM old_rows o ORDER BY o.id",
    }
    refs = {
        "insert": "REFERENCING NEW TABLE AS new_rows",
        "update": "REFERENCING OLD TABLE AS old_rows NEW TABLE AS new_rows",
        "delete": "REFERENCING OLD TABLE AS old_rows",
    }
    settings = f"SET work_mem = '{PG_WORK_MEM}' " if form == "json" else ""
    for operation in OPS:
        name = trigger_name(table, operation)
        op.execute(f"DROP FUNCTION IF EXISTS {name}() CASCADE")  # a SET clause is not replaced
        op.execute(
            f"CREATE FUNCTION {name}() RETURNS trigger LANGUAGE plpgsql {settings}AS $$ "
            f"BEGIN {bodies[operation]}; RETURN NULL; END $$"
        )
        op.execute(
            f"CREATE TRIGGER {name} AFTER {operation.upper()} ON {table} "
            f"{refs[operation]} FOR EACH STATEMENT EXECUTE FUNCTION {name}()"
        )


def _sqlite_create(table: str) -> None:
    rtype, state = TRACKED[table]
    columns = _columns(op.get_bind(), table)
    names = {name for name, _ in columns}

    def body(alias: str) -> str:
        pairs = ", ".join(
            f"'{n}', json({alias}.\"{n}\")" if is_json else f"'{n}', {alias}.\"{n}\""
            for n, is_json in columns
        )
        return f"json_object({pairs})"

    now = "strftime('%Y-%m-%d %H:%M:%f', 'now')"
    head = (
        "INSERT INTO changes (xact_id, changed_at, resource_type, resource_id, kind, version, body)"
    )
    ver_n = "NEW.version" if "version" in names else "NULL"
    ver_o = "OLD.version" if "version" in names else "NULL"
    kinds = []
    if "retired_at" in names:
        kinds.append("WHEN OLD.retired_at IS NULL AND NEW.retired_at IS NOT NULL THEN 'retired'")
    if state is not None:
        kinds.append(f'WHEN OLD."{state}" IS NOT NEW."{state}" THEN \'state_changed\'')
    kind = ("CASE " + " ".join(kinds) + " ELSE 'updated' END") if kinds else "'updated'"
    changed = " OR ".join(f'OLD."{n}" IS NOT NEW."{n}"' for n, _ in columns if n not in IGNORED)
    statements = {
        "insert": f"AFTER INSERT ON {table} BEGIN {head} VALUES "
        f"(0, {now}, '{rtype}', NEW.id, 'created', {ver_n}, {body('NEW')}); END",
        "update": f"AFTER UPDATE ON {table} WHEN {changed} BEGIN {head} VALUES "
        f"(0, {now}, '{rtype}', NEW.id, {kind}, {ver_n}, {body('NEW')}); END",
        "delete": f"AFTER DELETE ON {table} BEGIN {head} VALUES "
        f"(0, {now}, '{rtype}', OLD.id, 'deleted', {ver_o}, NULL); END",
    }
    for operation in OPS:
        name = trigger_name(table, operation)
        op.execute(f"DROP TRIGGER IF EXISTS {name}")
        op.execute(f"CREATE TRIGGER {name} {statements[operation]}")


def create_triggers(
    operations: Any = None, tables: Sequence[str] | None = None, pg_form: str | None = None
) -> None:
    """(Re-)create the change triggers of the tracked tables (all by default).

    Takes `op` for symmetry with migration code; later migrations call it after a SQLite
    batch rebuild or a new column on a tracked table. pg_form: see PG_FORM.
    """
    dialect = op.get_bind().dialect.name
    for table in tables or TRACKED:
        if dialect == "postgresql":
            _pg_create(table, pg_form)
        else:
            _sqlite_create(table)


def drop_triggers(operations: Any = None, tables: Sequence[str] | None = None) -> None:
    """Drop the change triggers (and on PostgreSQL their functions)."""
    dialect = op.get_bind().dialect.name
    for table in tables or TRACKED:
        for operation in OPS:
            name = trigger_name(table, operation)
            if dialect == "postgresql":
                op.execute(f"DROP TRIGGER IF EXISTS {name} ON {table}")
                op.execute(f"DROP FUNCTION IF EXISTS {name}()")
            else:
                op.execute(f"DROP TRIGGER IF EXISTS {name}")


def upgrade() -> None:
    big_id = sa.BigInteger().with_variant(sa.Integer(), "sqlite")
    op.create_table(
        "changes",
        sa.Column("id", big_id, nullable=False),
        sa.Column("xact_id", sa.BigInteger(), server_default="0", nullable=False),
        sa.Column("changed_at", sa.DateTime(timezone=True), nullable=False),
        sa.Column("resource_type", sa.String(40), nullable=False),
        sa.Column("resource_id", sa.BigInteger(), nullable=False),
        sa.Column("kind", sa.String(16), nullable=False),
        sa.Column("version", sa.Integer(), nullable=True),
        sa.Column("body", sa.JSON(), nullable=True),
        sa.PrimaryKeyConstraint("id", name=op.f("pk_changes")),
        sqlite_autoincrement=True,
    )
    op.create_index("ix_changes_xact_id_id", "changes", ["xact_id", "id"])
    op.create_index(op.f("ix_changes_changed_at"), "changes", ["changed_at"])
    op.create_index(
        "ix_changes_resource_type_resource_id", "changes", ["resource_type", "resource_id"]
    )
    op.create_table(
        "webhook_subscriptions",
        sa.Column("id", sa.Integer(), nullable=False),
        sa.Column("url", sa.String(2000), nullable=False),
        sa.Column("types", sa.JSON(), nullable=True),
        sa.Column("secret", sa.String(100), nullable=False),
        sa.Column("description", sa.String(300), nullable=True),
        sa.Column("state", sa.String(10), nullable=False),
        sa.Column("paused_at", sa.DateTime(timezone=True), nullable=True),
        sa.Column("paused_reason", sa.String(500), nullable=True),
        sa.Column("cursor_xact", sa.BigInteger(), server_default="0", nullable=False),
        sa.Column("cursor_id", sa.BigInteger(), server_default="0", nullable=False),
        sa.Column("version", sa.Integer(), server_default="1", nullable=False),
        sa.Column(
            "created_at", sa.DateTime(timezone=True), server_default=sa.func.now(), nullable=False
        ),
        sa.Column(
            "updated_at", sa.DateTime(timezone=True), server_default=sa.func.now(), nullable=False
        ),
        sa.CheckConstraint(
            "state IN ('active', 'paused')", name=op.f("ck_webhook_subscriptions_state")
        ),
        sa.PrimaryKeyConstraint("id", name=op.f("pk_webhook_subscriptions")),
    )
    op.create_table(
        "webhook_deliveries",
        sa.Column("id", sa.Integer(), nullable=False),
        sa.Column("subscription_id", sa.Integer(), nullable=False),
        sa.Column("change_id", sa.BigInteger(), nullable=False),
        sa.Column("payload", sa.JSON(), nullable=False),
        sa.Column("state", sa.String(10), nullable=False),
        sa.Column("attempts", sa.Integer(), server_default="0", nullable=False),
        sa.Column("next_attempt_at", sa.DateTime(timezone=True), nullable=False),
        sa.Column("lease_expires_at", sa.DateTime(timezone=True), nullable=True),
        sa.Column("lease_owner", sa.String(200), nullable=True),
        sa.Column("last_status", sa.Integer(), nullable=True),
        sa.Column("last_error", sa.Text(), nullable=True),
        sa.Column("delivered_at", sa.DateTime(timezone=True), nullable=True),
        sa.Column(
            "created_at", sa.DateTime(timezone=True), server_default=sa.func.now(), nullable=False
        ),
        sa.Column("window_started_at", sa.DateTime(timezone=True), nullable=False),
        sa.CheckConstraint(
            "state IN ('pending', 'delivered', 'failed')", name=op.f("ck_webhook_deliveries_state")
        ),
        sa.ForeignKeyConstraint(
            ["subscription_id"],
            ["webhook_subscriptions.id"],
            name=op.f("fk_webhook_deliveries_subscription_id_webhook_subscriptions"),
            ondelete="CASCADE",
        ),
        sa.PrimaryKeyConstraint("id", name=op.f("pk_webhook_deliveries")),
        sa.UniqueConstraint(
            "subscription_id",
            "change_id",
            name=op.f("uq_webhook_deliveries_subscription_id_change_id"),
        ),
    )
    op.create_index(
        "ix_webhook_deliveries_state_next", "webhook_deliveries", ["state", "next_attempt_at"]
    )
    op.create_table(
        "webhook_attempts",
        sa.Column("id", sa.Integer(), nullable=False),
        sa.Column("delivery_id", sa.Integer(), nullable=False),
        sa.Column("subscription_id", sa.Integer(), nullable=False),
        sa.Column("attempt_no", sa.Integer(), nullable=False),
        sa.Column("started_at", sa.DateTime(timezone=True), nullable=False),
        sa.Column("status_code", sa.Integer(), nullable=True),
        sa.Column("latency_ms", sa.Float(), nullable=False),
        sa.Column("error", sa.Text(), nullable=True),
        sa.Column("outcome", sa.String(10), nullable=False),
        sa.ForeignKeyConstraint(
            ["delivery_id"],
            ["webhook_deliveries.id"],
            name=op.f("fk_webhook_attempts_delivery_id_webhook_deliveries"),
            ondelete="CASCADE",
        ),
        sa.ForeignKeyConstraint(
            ["subscription_id"],
            ["webhook_subscriptions.id"],
            name=op.f("fk_webhook_attempts_subscription_id_webhook_subscriptions"),
            ondelete="CASCADE",
        ),
        sa.PrimaryKeyConstraint("id", name=op.f("pk_webhook_attempts")),
    )
    op.create_index(
        op.f("ix_webhook_attempts_subscription_id"), "webhook_attempts", ["subscription_id"]
    )
    op.create_index(op.f("ix_webhook_attempts_delivery_id"), "webhook_attempts", ["delivery_id"])
    create_triggers(op)


def downgrade() -> None:
    drop_triggers(op)
    op.drop_table("webhook_attempts")
    op.drop_index("ix_webhook_deliveries_state_next", table_name="webhook_deliveries")
    op.drop_table("webhook_deliveries")
    op.drop_table("webhook_subscriptions")
    op.drop_table("changes")
