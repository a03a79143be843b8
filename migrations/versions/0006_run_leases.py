"""weekly-run leases and heartbeats

Revision ID: 0006
Revises: 0005
Create Date: 2026-12-02
"""

from collections.abc import Sequence

import sqlalchemy as sa
from alembic import op

revision: str = "0006"
down_revision: str | None = "0005"
branch_labels: str | Sequence[str] | None = None
depends_on: str | Sequence[str] | None = None


def upgrade() -> None:
    with op.batch_alter_table("weekly_runs") as batch:
        batch.add_column(sa.Column("lease_expires_at", sa.DateTime(timezone=True), nullable=True))
        batch.add_column(sa.Column("heartbeat_at", sa.DateTime(timezone=True), nullable=True))
        batch.add_column(sa.Column("owner", sa.String(200), nullable=True))


def downgrade() -> None:
    with op.batch_alter_table("weekly_runs") as batch:
        batch.drop_column("owner")
        batch.drop_column("heartbeat_at")
        batch.drop_column("lease_expires_at")
