"""model fidelity - exposure, LED test data, luminaire dirt and cleaning

Revision ID: 0012
Revises: 0011
Create Date: 2026-12-02
"""

import importlib.util
import pathlib
from collections.abc import Sequence
from typing import Any

import sqlalchemy as sa
from alembic import op

revision: str = "0012"
down_revision: str | None = "0011"
branch_labels: str | Sequence[str] | None = None
depends_on: str | Sequence[str] | None = None


def _feed() -> Any:
    """The 0011 migration module (its name starts with a digit: loaded by path)."""
    path = pathlib.Path(__file__).with_name("0011_changes.py")
    spec = importlib.util.spec_from_file_location("changes_0011", path)
    assert spec is not None and spec.loader is not None
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module


def _retrigger_lamp_types() -> None:
    """SQLite's change triggers list lamp_types' columns: re-make them for the new set."""
    if op.get_bind().dialect.name == "sqlite":
        _feed().create_triggers(op, ["lamp_types"])


def upgrade() -> None:
    # Plain ADD COLUMN (no batch rebuild on SQLite, so the change-feed triggers stay).
    # A lamp found dark without a report failed after this (rated-condition hours) and by
    # normalised_hours: an interval-censored failure; NULL for exact failures and survivors.
    op.add_column(
        "lamp_removals", sa.Column("failed_after_normalised_hours", sa.Float(), nullable=True)
    )
    # LED lamp types: a catastrophic-failure B10 life apart from the L70 lumen life, and
    # LM-80-style test data for the TM-21 projection.
    op.add_column("lamp_types", sa.Column("failure_b10_h", sa.Float(), nullable=True))
    op.add_column("lamp_types", sa.Column("lm80_points", sa.JSON(), nullable=True))
    op.add_column("lamp_types", sa.Column("lm80_units", sa.Integer(), nullable=True))
    op.add_column("lamp_types", sa.Column("lm80_duration_h", sa.Float(), nullable=True))
    _retrigger_lamp_types()


def downgrade() -> None:
    with op.batch_alter_table("lamp_types") as batch:
        for name in ("lm80_duration_h", "lm80_units", "lm80_points", "failure_b10_h"):
            batch.drop_column(name)
    _retrigger_lamp_types()  # the batch rebuild on SQLite dropped them
    with op.batch_alter_table("lamp_removals") as batch:
        batch.drop_column("failed_after_normalised_hours")
