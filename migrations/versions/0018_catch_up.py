"""catch-up capacity and draft runs per site

Revision ID: 0018
Revises: 0017
Create Date: 2026-12-03

Sites get a weekly capacity for group relamps (labour hours and money, both optional: no
limit when empty), which the catch-up schedule (service/planning/catch_up.py) keeps to, and
`weekly_run_drafts`: the weekly run makes draft orders for a planner to issue instead of
issued ones. Plain ADD COLUMN (no batch rebuild on SQLite); the SQLite change triggers list
the sites' columns, so they are re-made for the new set (migrations/versions/0011_changes.py).
"""

import importlib.util
import pathlib
from collections.abc import Sequence
from typing import Any

import sqlalchemy as sa
from alembic import op

revision: str = "0018"
down_revision: str | None = "0017"
branch_labels: str | Sequence[str] | None = None
depends_on: str | Sequence[str] | None = None

COLUMNS = ("weekly_labour_h_capacity", "weekly_budget_capacity", "weekly_run_drafts")


def _feed() -> Any:
    """The 0011 migration module (its name starts with a digit: loaded by path)."""
    path = pathlib.Path(__file__).with_name("0011_changes.py")
    spec = importlib.util.spec_from_file_location("changes_0011", path)
    assert spec is not None and spec.loader is not None
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module


def _retrigger_sites() -> None:
    """SQLite's change triggers list the sites' columns: re-make them for the new set."""
    if op.get_bind().dialect.name == "sqlite":
        _feed().create_triggers(op, ["sites"])


def upgrade() -> None:
    op.add_column("sites", sa.Column("weekly_labour_h_capacity", sa.Float(), nullable=True))
    op.add_column("sites", sa.Column("weekly_budget_capacity", sa.Float(), nullable=True))
    op.add_column(
        "sites",
        sa.Column("weekly_run_drafts", sa.Boolean(), nullable=False, server_default=sa.false()),
    )
    _retrigger_sites()


def downgrade() -> None:
    with op.batch_alter_table("sites") as batch:
        for name in reversed(COLUMNS):
            batch.drop_column(name)
    _retrigger_sites()  # the batch rebuild on SQLite dropped them
