"""integration lookups - external references

Revision ID: 0014
Revises: 0013
Create Date: 2026-12-02

Sites and fixtures get the `external_reference` work orders already have (the id a
client's own system keeps for the record); in each of the three tables it is unique when
set, by a unique index (NULLs never clash on either database). Indexes, not constraints:
SQLite adds them without a batch rebuild, so the change-feed triggers stay. The SQLite
triggers list their table's columns, so those of sites and fixtures are re-made to carry
the new column (migrations/versions/0011_changes.py).

A database whose work orders already share an external reference cannot take the unique
index: the upgrade stops and names the duplicates, to be cleared by hand first.
"""

import importlib.util
import pathlib
from collections.abc import Sequence
from typing import Any

import sqlalchemy as sa
from alembic import op

revision: str = "0014"
down_revision: str | None = "0013"
branch_labels: str | Sequence[str] | None = None
depends_on: str | Sequence[str] | None = None

TABLES = ("sites", "fixtures", "work_orders")


def _feed() -> Any:
    """The 0011 migration module (its name starts with a digit: loaded by path)."""
    path = pathlib.Path(__file__).with_name("0011_changes.py")
    spec = importlib.util.spec_from_file_location("changes_0011", path)
    assert spec is not None and spec.loader is not None
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module


def _refuse_duplicates() -> None:
    rows = (
        op.get_bind()
        .execute(
            sa.text(
                "SELECT external_reference, COUNT(*) FROM work_orders "
                "WHERE external_reference IS NOT NULL "
                "GROUP BY external_reference HAVING COUNT(*) > 1"
            )
        )
        .all()
    )
    if rows:
        shown = ", ".join(f"{ref!r} ({n} orders)" for ref, n in rows[:10])
        raise RuntimeError(
            "work orders share external references; make them unique, then upgrade: " + shown
        )


def upgrade() -> None:
    _refuse_duplicates()
    op.add_column("sites", sa.Column("external_reference", sa.String(length=200), nullable=True))
    op.add_column(
        "fixtures", sa.Column("external_reference", sa.String(length=200), nullable=True)
    )
    for table in TABLES:
        op.create_index(f"uq_{table}_external_reference", table, ["external_reference"], unique=True)
    if op.get_bind().dialect.name == "sqlite":
        _feed().create_triggers(op, ["sites", "fixtures"])


def downgrade() -> None:
    for table in TABLES:
        op.drop_index(f"uq_{table}_external_reference", table_name=table)
    with op.batch_alter_table("fixtures") as batch:
        batch.drop_column("external_reference")
    with op.batch_alter_table("sites") as batch:
        batch.drop_column("external_reference")
    if op.get_bind().dialect.name == "sqlite":
        _feed().create_triggers(op, ["sites", "fixtures"])
