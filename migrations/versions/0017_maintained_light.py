"""maintained light - luminaire dirt and cleaning per area

Revision ID: 0017
Revises: 0016
Create Date: 2026-12-03

Areas get what the luminaire maintenance factor needs (service/reliability/dirt.py, CIE
97:2005): the luminaire type and the dirt of the environment, the cleaning interval (NULL:
cleaned only at group relamps), whether a group relamp includes cleaning, the cleaning
labour per fixture and when the luminaires were last cleaned. Plain ADD COLUMN with server
defaults (no batch rebuild); the SQLite change triggers list the areas' columns, so they
are re-made (migrations/versions/0011_changes.py).
"""

import importlib.util
import pathlib
from collections.abc import Sequence
from typing import Any

import sqlalchemy as sa
from alembic import op

revision: str = "0017"
down_revision: str | None = "0016"
branch_labels: str | Sequence[str] | None = None
depends_on: str | Sequence[str] | None = None

COLUMNS = (
    "luminaire_type",
    "dirt_environment",
    "cleaning_interval_months",
    "relamp_includes_cleaning",
    "cleaning_minutes_per_fixture",
    "last_cleaned_at",
)


def _feed() -> Any:
    """The 0011 migration module (its name starts with a digit: loaded by path)."""
    path = pathlib.Path(__file__).with_name("0011_changes.py")
    spec = importlib.util.spec_from_file_location("changes_0011", path)
    assert spec is not None and spec.loader is not None
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module


def _retrigger_areas() -> None:
    if op.get_bind().dialect.name == "sqlite":
        _feed().create_triggers(op, ["areas"])


def upgrade() -> None:
    add = op.add_column
    add(
        "areas",
        sa.Column("luminaire_type", sa.String(24), nullable=False, server_default="enclosed"),
    )
    add(
        "areas",
        sa.Column("dirt_environment", sa.String(12), nullable=False, server_default="clean"),
    )
    add("areas", sa.Column("cleaning_interval_months", sa.Float(), server_default="12"))
    add(
        "areas",
        sa.Column(
            "relamp_includes_cleaning", sa.Boolean(), nullable=False, server_default=sa.false()
        ),
    )
    add(
        "areas",
        sa.Column("cleaning_minutes_per_fixture", sa.Float(), nullable=False, server_default="10"),
    )
    add("areas", sa.Column("last_cleaned_at", sa.DateTime(timezone=True), nullable=True))
    _retrigger_areas()


def downgrade() -> None:
    with op.batch_alter_table("areas") as batch:
        for name in reversed(COLUMNS):
            batch.drop_column(name)
    _retrigger_areas()  # the batch rebuild on SQLite dropped them
