"""retirement instead of deletion for records with history

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


def upgrade() -> None:
    for table in RETIRABLE:
        with op.batch_alter_table(table) as batch:
            batch.add_column(sa.Column("retired_at", sa.DateTime(timezone=True), nullable=True))


def downgrade() -> None:
    for table in reversed(RETIRABLE):
        with op.batch_alter_table(table) as batch:
            batch.drop_column("retired_at")
