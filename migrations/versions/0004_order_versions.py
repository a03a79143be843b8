"""work-order versions, report links and open-order guards

Revision ID: 0004
Revises: 0003
Create Date: 2026-12-02
"""

from collections.abc import Sequence

import sqlalchemy as sa
from alembic import op

revision: str = "0004"
down_revision: str | None = "0003"
branch_labels: str | Sequence[str] | None = None
depends_on: str | Sequence[str] | None = None


OPEN_GROUP_SQL = "kind = 'group_relamp' AND state IN ('draft', 'issued', 'in_progress')"


def upgrade() -> None:
    with op.batch_alter_table("work_orders") as batch:
        batch.add_column(sa.Column("version", sa.Integer(), server_default="1", nullable=False))
    op.create_index(
        "uq_work_orders_open_group_area",
        "work_orders",
        ["area_id"],
        unique=True,
        sqlite_where=sa.text(OPEN_GROUP_SQL),
        postgresql_where=sa.text(OPEN_GROUP_SQL),
    )


def downgrade() -> None:
    op.drop_index("uq_work_orders_open_group_area", table_name="work_orders")
    with op.batch_alter_table("work_orders") as batch:
        batch.drop_column("version")
