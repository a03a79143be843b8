"""work-order lines: per-position outcomes and covered spot orders

Revision ID: 0009
Revises: 0008
Create Date: 2026-12-02
"""

from collections.abc import Sequence

import sqlalchemy as sa
from alembic import op

revision: str = "0009"
down_revision: str | None = "0008"
branch_labels: str | Sequence[str] | None = None
depends_on: str | Sequence[str] | None = None


def upgrade() -> None:
    with op.batch_alter_table("work_orders", schema=None) as batch_op:
        batch_op.add_column(sa.Column("covered_by_order_id", sa.Integer(), nullable=True))
        batch_op.create_foreign_key(
            batch_op.f("fk_work_orders_covered_by_order_id_work_orders"),
            "work_orders",
            ["covered_by_order_id"],
            ["id"],
            ondelete="SET NULL",
        )
        batch_op.create_index(
            batch_op.f("ix_work_orders_covered_by_order_id"), ["covered_by_order_id"], unique=False
        )
    with op.batch_alter_table("work_order_lines", schema=None) as batch_op:
        batch_op.add_column(sa.Column("position_outcomes", sa.JSON(), nullable=True))


def downgrade() -> None:
    with op.batch_alter_table("work_order_lines", schema=None) as batch_op:
        batch_op.drop_column("position_outcomes")
    with op.batch_alter_table("work_orders", schema=None) as batch_op:
        batch_op.drop_index(batch_op.f("ix_work_orders_covered_by_order_id"))
        batch_op.drop_constraint(
            batch_op.f("fk_work_orders_covered_by_order_id_work_orders"), type_="foreignkey"
        )
        batch_op.drop_column("covered_by_order_id")
