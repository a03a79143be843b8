"""model fidelity - exposure, LED test data, luminaire dirt and cleaning

Revision ID: 0012
Revises: 0011
Create Date: 2026-12-02
"""

from collections.abc import Sequence

import sqlalchemy as sa
from alembic import op

revision: str = "0012"
down_revision: str | None = "0011"
branch_labels: str | Sequence[str] | None = None
depends_on: str | Sequence[str] | None = None


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


def downgrade() -> None:
    with op.batch_alter_table("lamp_types") as batch:
        for name in ("lm80_duration_h", "lm80_units", "lm80_points", "failure_b10_h"):
            batch.drop_column(name)
    with op.batch_alter_table("lamp_removals") as batch:
        batch.drop_column("failed_after_normalised_hours")
