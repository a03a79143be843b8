"""work orders and weekly runs (issue 5)

Revision ID: 0003
Revises: 0002
Create Date: 2026-12-01
"""

from collections.abc import Sequence

import sqlalchemy as sa
from alembic import op

revision: str = "0003"
down_revision: str | None = "0002"
branch_labels: str | Sequence[str] | None = None
depends_on: str | Sequence[str] | None = None


def upgrade() -> None:
    op.create_table(
        "run_weeks",
        sa.Column("id", sa.Integer(), nullable=False),
        sa.Column("site_id", sa.Integer(), nullable=False),
        sa.Column("iso_week", sa.String(length=8), nullable=False),
        sa.Column("succeeded_at", sa.DateTime(timezone=True), nullable=True),
        sa.Column(
            "created_at", sa.DateTime(timezone=True), server_default=sa.func.now(), nullable=False
        ),
        sa.Column(
            "updated_at", sa.DateTime(timezone=True), server_default=sa.func.now(), nullable=False
        ),
        sa.ForeignKeyConstraint(
            ["site_id"], ["sites.id"], name=op.f("fk_run_weeks_site_id_sites"), ondelete="CASCADE"
        ),
        sa.PrimaryKeyConstraint("id", name=op.f("pk_run_weeks")),
        sa.UniqueConstraint("site_id", "iso_week", name=op.f("uq_run_weeks_site_id_iso_week")),
    )
    op.create_table(
        "weekly_runs",
        sa.Column("id", sa.Integer(), nullable=False),
        sa.Column("site_id", sa.Integer(), nullable=False),
        sa.Column("iso_week", sa.String(length=8), nullable=False),
        sa.Column("trigger", sa.String(length=10), nullable=False),
        sa.Column("started_at", sa.DateTime(timezone=True), nullable=False),
        sa.Column("finished_at", sa.DateTime(timezone=True), nullable=True),
        sa.Column("outcome", sa.String(length=10), nullable=False),
        sa.Column("group_orders", sa.Integer(), nullable=False),
        sa.Column("spot_orders", sa.Integer(), nullable=False),
        sa.Column("orders_created", sa.Integer(), nullable=False),
        sa.Column("orders_already_there", sa.Integer(), nullable=False),
        sa.Column("error", sa.Text(), nullable=True),
        sa.ForeignKeyConstraint(
            ["site_id"], ["sites.id"], name=op.f("fk_weekly_runs_site_id_sites"), ondelete="CASCADE"
        ),
        sa.PrimaryKeyConstraint("id", name=op.f("pk_weekly_runs")),
    )
    with op.batch_alter_table("weekly_runs", schema=None) as batch_op:
        batch_op.create_index(batch_op.f("ix_weekly_runs_site_id"), ["site_id"], unique=False)

    op.create_table(
        "work_orders",
        sa.Column("id", sa.Integer(), nullable=False),
        sa.Column("site_id", sa.Integer(), nullable=False),
        sa.Column("area_id", sa.Integer(), nullable=False),
        sa.Column("kind", sa.String(length=20), nullable=False),
        sa.Column("state", sa.String(length=12), nullable=False),
        sa.Column("iso_week", sa.String(length=8), nullable=True),
        sa.Column("run_id", sa.Integer(), nullable=True),
        sa.Column("due_on", sa.Date(), nullable=True),
        sa.Column("access_method", sa.String(length=10), nullable=False),
        sa.Column("lamp_quantity", sa.Integer(), nullable=False),
        sa.Column("estimated_labour_h", sa.Float(), nullable=False),
        sa.Column("disposal_instructions", sa.Text(), nullable=False),
        sa.Column("safety_cautions", sa.Text(), nullable=False),
        sa.Column("external_reference", sa.String(length=200), nullable=True),
        sa.Column("notes", sa.String(length=2000), nullable=True),
        sa.Column("state_changed_at", sa.DateTime(timezone=True), nullable=True),
        sa.Column("completed_at", sa.DateTime(timezone=True), nullable=True),
        sa.Column("cancel_reason", sa.String(length=500), nullable=True),
        sa.Column("plan", sa.JSON(), nullable=True),
        sa.Column(
            "created_at", sa.DateTime(timezone=True), server_default=sa.func.now(), nullable=False
        ),
        sa.Column(
            "updated_at", sa.DateTime(timezone=True), server_default=sa.func.now(), nullable=False
        ),
        sa.ForeignKeyConstraint(
            ["area_id"], ["areas.id"], name=op.f("fk_work_orders_area_id_areas"), ondelete="CASCADE"
        ),
        sa.ForeignKeyConstraint(
            ["run_id"],
            ["weekly_runs.id"],
            name=op.f("fk_work_orders_run_id_weekly_runs"),
            ondelete="SET NULL",
        ),
        sa.ForeignKeyConstraint(
            ["site_id"], ["sites.id"], name=op.f("fk_work_orders_site_id_sites"), ondelete="CASCADE"
        ),
        sa.PrimaryKeyConstraint("id", name=op.f("pk_work_orders")),
        sa.UniqueConstraint(
            "site_id",
            "iso_week",
            "area_id",
            "kind",
            name=op.f("uq_work_orders_site_id_iso_week_area_id_kind"),
        ),
    )
    with op.batch_alter_table("work_orders", schema=None) as batch_op:
        batch_op.create_index(batch_op.f("ix_work_orders_area_id"), ["area_id"], unique=False)
        batch_op.create_index("ix_work_orders_site_state", ["site_id", "state"], unique=False)
        batch_op.create_index("ix_work_orders_updated", ["updated_at"], unique=False)

    op.create_table(
        "work_order_lines",
        sa.Column("id", sa.Integer(), nullable=False),
        sa.Column("work_order_id", sa.Integer(), nullable=False),
        sa.Column("fixture_id", sa.Integer(), nullable=False),
        sa.Column("fixture_tag", sa.String(length=64), nullable=False),
        sa.Column("location", sa.String(length=300), nullable=True),
        sa.Column("lamp_type_id", sa.Integer(), nullable=False),
        sa.Column("lamp_type_code", sa.String(length=40), nullable=False),
        sa.Column("quantity", sa.Integer(), nullable=False),
        sa.Column("position_ids", sa.JSON(), nullable=False),
        sa.Column("position_nos", sa.JSON(), nullable=False),
        sa.Column("report_ids", sa.JSON(), nullable=True),
        sa.Column("outcome", sa.String(length=10), nullable=True),
        sa.Column("skip_reason", sa.String(length=500), nullable=True),
        sa.Column("extra", sa.JSON(), nullable=True),
        sa.ForeignKeyConstraint(
            ["fixture_id"],
            ["fixtures.id"],
            name=op.f("fk_work_order_lines_fixture_id_fixtures"),
            ondelete="CASCADE",
        ),
        sa.ForeignKeyConstraint(
            ["lamp_type_id"],
            ["lamp_types.id"],
            name=op.f("fk_work_order_lines_lamp_type_id_lamp_types"),
            ondelete="RESTRICT",
        ),
        sa.ForeignKeyConstraint(
            ["work_order_id"],
            ["work_orders.id"],
            name=op.f("fk_work_order_lines_work_order_id_work_orders"),
            ondelete="CASCADE",
        ),
        sa.PrimaryKeyConstraint("id", name=op.f("pk_work_order_lines")),
    )
    with op.batch_alter_table("work_order_lines", schema=None) as batch_op:
        batch_op.create_index(
            batch_op.f("ix_work_order_lines_work_order_id"), ["work_order_id"], unique=False
        )


def downgrade() -> None:
    with op.batch_alter_table("work_order_lines", schema=None) as batch_op:
        batch_op.drop_index(batch_op.f("ix_work_order_lines_work_order_id"))

    op.drop_table("work_order_lines")
    with op.batch_alter_table("work_orders", schema=None) as batch_op:
        batch_op.drop_index("ix_work_orders_updated")
        batch_op.drop_index("ix_work_orders_site_state")
        batch_op.drop_index(batch_op.f("ix_work_orders_area_id"))

    op.drop_table("work_orders")
    with op.batch_alter_table("weekly_runs", schema=None) as batch_op:
        batch_op.drop_index(batch_op.f("ix_weekly_runs_site_id"))

    op.drop_table("weekly_runs")
    op.drop_table("run_weeks")
