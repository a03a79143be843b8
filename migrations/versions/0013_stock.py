"""stock - storerooms and the lamp ledger

One storeroom per existing site is created (named after the site) and the site mapped to
it; sites made later get one when a storeroom is created for them (POST /storerooms).

Revision ID: 0013
Revises: 0012
Create Date: 2026-12-02
"""

from collections.abc import Sequence

import sqlalchemy as sa
from alembic import op

revision: str = "0013"
down_revision: str | None = "0012"
branch_labels: str | Sequence[str] | None = None
depends_on: str | Sequence[str] | None = None


def _stamps() -> list[sa.Column]:
    return [
        sa.Column(
            "created_at", sa.DateTime(timezone=True), server_default=sa.func.now(), nullable=False
        ),
        sa.Column(
            "updated_at", sa.DateTime(timezone=True), server_default=sa.func.now(), nullable=False
        ),
    ]


def upgrade() -> None:
    op.create_table(
        "storerooms",
        sa.Column("id", sa.Integer(), nullable=False),
        sa.Column("name", sa.String(length=200), nullable=False),
        sa.Column("notes", sa.String(length=2000), nullable=True),
        *_stamps(),
        sa.PrimaryKeyConstraint("id", name=op.f("pk_storerooms")),
        sa.UniqueConstraint("name", name=op.f("uq_storerooms_name")),
    )
    op.create_table(
        "stock_balances",
        sa.Column("id", sa.Integer(), nullable=False),
        sa.Column("storeroom_id", sa.Integer(), nullable=False),
        sa.Column("lamp_type_id", sa.Integer(), nullable=False),
        sa.Column("on_hand", sa.Integer(), nullable=False),
        sa.Column("reserved", sa.Integer(), nullable=False),
        sa.Column("lead_time_weeks", sa.Float(), nullable=False),
        sa.Column("pack_size", sa.Integer(), nullable=False),
        sa.Column("order_cost", sa.Float(), nullable=False),
        sa.Column("holding_rate_per_year", sa.Float(), nullable=False),
        sa.Column("unit_cost", sa.Float(), nullable=True),
        sa.Column("policy", sa.String(length=20), nullable=False),
        sa.Column("version", sa.Integer(), server_default="1", nullable=False),
        *_stamps(),
        sa.CheckConstraint("pack_size >= 1", name=op.f("ck_stock_balances_pack_size_positive")),
        sa.CheckConstraint("reserved >= 0", name=op.f("ck_stock_balances_reserved_not_negative")),
        sa.ForeignKeyConstraint(
            ["lamp_type_id"],
            ["lamp_types.id"],
            name=op.f("fk_stock_balances_lamp_type_id_lamp_types"),
            ondelete="RESTRICT",
        ),
        sa.ForeignKeyConstraint(
            ["storeroom_id"],
            ["storerooms.id"],
            name=op.f("fk_stock_balances_storeroom_id_storerooms"),
            ondelete="RESTRICT",
        ),
        sa.PrimaryKeyConstraint("id", name=op.f("pk_stock_balances")),
        sa.UniqueConstraint(
            "storeroom_id", "lamp_type_id", name=op.f("uq_stock_balances_storeroom_id_lamp_type_id")
        ),
    )
    op.create_index(
        op.f("ix_stock_balances_lamp_type_id"), "stock_balances", ["lamp_type_id"], unique=False
    )
    op.create_table(
        "storeroom_sites",
        sa.Column("site_id", sa.Integer(), nullable=False),
        sa.Column("storeroom_id", sa.Integer(), nullable=False),
        sa.ForeignKeyConstraint(
            ["site_id"],
            ["sites.id"],
            name=op.f("fk_storeroom_sites_site_id_sites"),
            ondelete="CASCADE",
        ),
        sa.ForeignKeyConstraint(
            ["storeroom_id"],
            ["storerooms.id"],
            name=op.f("fk_storeroom_sites_storeroom_id_storerooms"),
            ondelete="RESTRICT",
        ),
        sa.PrimaryKeyConstraint("site_id", name=op.f("pk_storeroom_sites")),
    )
    op.create_index(
        op.f("ix_storeroom_sites_storeroom_id"), "storeroom_sites", ["storeroom_id"], unique=False
    )
    op.create_table(
        "stock_movements",
        sa.Column("id", sa.Integer(), nullable=False),
        sa.Column("storeroom_id", sa.Integer(), nullable=False),
        sa.Column("lamp_type_id", sa.Integer(), nullable=False),
        sa.Column("kind", sa.String(length=10), nullable=False),
        sa.Column("quantity", sa.Integer(), nullable=False),
        sa.Column("on_hand_delta", sa.Integer(), nullable=False),
        sa.Column("reserved_delta", sa.Integer(), nullable=False),
        sa.Column("work_order_id", sa.Integer(), nullable=True),
        sa.Column("step", sa.String(length=20), nullable=True),
        sa.Column("note", sa.String(length=500), nullable=True),
        sa.Column("at", sa.DateTime(timezone=True), nullable=False),
        sa.ForeignKeyConstraint(
            ["lamp_type_id"],
            ["lamp_types.id"],
            name=op.f("fk_stock_movements_lamp_type_id_lamp_types"),
            ondelete="RESTRICT",
        ),
        sa.ForeignKeyConstraint(
            ["storeroom_id"],
            ["storerooms.id"],
            name=op.f("fk_stock_movements_storeroom_id_storerooms"),
            ondelete="RESTRICT",
        ),
        sa.ForeignKeyConstraint(
            ["work_order_id"],
            ["work_orders.id"],
            name=op.f("fk_stock_movements_work_order_id_work_orders"),
            ondelete="RESTRICT",
        ),
        sa.PrimaryKeyConstraint("id", name=op.f("pk_stock_movements")),
        sa.UniqueConstraint(
            "work_order_id",
            "step",
            "lamp_type_id",
            name=op.f("uq_stock_movements_work_order_id_step_lamp_type_id"),
        ),
    )
    op.create_index(
        "ix_stock_movements_balance",
        "stock_movements",
        ["storeroom_id", "lamp_type_id", "id"],
        unique=False,
    )
    op.create_index(
        op.f("ix_stock_movements_work_order_id"), "stock_movements", ["work_order_id"], unique=False
    )
    # Backfill: one storeroom per site, named after it (site names are unique).
    op.execute(
        "INSERT INTO storerooms (name) SELECT 'Storeroom of ' || name FROM sites ORDER BY id"
    )
    op.execute(
        "INSERT INTO storeroom_sites (site_id, storeroom_id) "
        "SELECT s.id, r.id FROM sites s JOIN storerooms r ON r.name = 'Storeroom of ' || s.name"
    )


def downgrade() -> None:
    op.drop_index(op.f("ix_stock_movements_work_order_id"), table_name="stock_movements")
    op.drop_index("ix_stock_movements_balance", table_name="stock_movements")
    op.drop_table("stock_movements")
    op.drop_index(op.f("ix_storeroom_sites_storeroom_id"), table_name="storeroom_sites")
    op.drop_table("storeroom_sites")
    op.drop_index(op.f("ix_stock_balances_lamp_type_id"), table_name="stock_balances")
    op.drop_table("stock_balances")
    op.drop_table("storerooms")
