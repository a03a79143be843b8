"""burnout report versions: ETag / If-Match and version-checked updates on reports

Revision ID: 0010
Revises: 0009
Create Date: 2026-12-02
"""

from collections.abc import Sequence

import sqlalchemy as sa
from alembic import op

revision: str = "0010"
down_revision: str | None = "0009"
branch_labels: str | Sequence[str] | None = None
depends_on: str | Sequence[str] | None = None


def upgrade() -> None:
    # ADD COLUMN needs no table rebuild on SQLite, so no trigger is lost.
    with op.batch_alter_table("burnout_reports") as batch:
        batch.add_column(sa.Column("version", sa.Integer(), nullable=False, server_default="1"))


def downgrade() -> None:
    with op.batch_alter_table("burnout_reports") as batch:
        batch.drop_column("version")
