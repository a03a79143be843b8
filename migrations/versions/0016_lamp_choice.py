"""lamp choice - retrofit options, withdrawn lamp types, site economics

Revision ID: 0016
Revises: 0014
Create Date: 2026-12-03

Lamp types get a family (types differing only in rated volts or make) and a withdrawal
date with its market. Sites get what a life-cycle cost needs: a yearly discount rate
(default 5 %), an energy price escalation (default 0), a grid emission factor (kg CO2 per
kWh, unset by default) and the market whose withdrawals apply. New tables: retrofit
options (an LED lamp or a replacement luminaire offered in place of a lamp type or in an
area) and the lamp choice each group work order names (history: an option named there is
retired, never deleted). lamp_types and sites are tracked by the change feed, and the SQLite
triggers list their columns, so those two tables' triggers are re-made (0011_changes.py).
"""

import importlib.util
import pathlib
from collections.abc import Sequence
from typing import Any

import sqlalchemy as sa
from alembic import op

revision: str = "0016"
down_revision: str | None = "0014"
branch_labels: str | Sequence[str] | None = None
depends_on: str | Sequence[str] | None = None

TRIGGER_TABLES = ["lamp_types", "sites"]


def _feed() -> Any:
    """The 0011 migration module (its name starts with a digit: loaded by path)."""
    path = pathlib.Path(__file__).with_name("0011_changes.py")
    spec = importlib.util.spec_from_file_location("changes_0011", path)
    assert spec is not None and spec.loader is not None
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module


def upgrade() -> None:
    op.add_column("lamp_types", sa.Column("family", sa.String(length=60), nullable=True))
    op.add_column("lamp_types", sa.Column("withdrawn_after", sa.Date(), nullable=True))
    op.add_column("lamp_types", sa.Column("withdrawn_market", sa.String(length=40), nullable=True))
    op.add_column(
        "sites", sa.Column("discount_rate", sa.Float(), server_default="0.05", nullable=False)
    )
    op.add_column(
        "sites",
        sa.Column("energy_escalation_rate", sa.Float(), server_default="0", nullable=False),
    )
    op.add_column("sites", sa.Column("emission_factor_kg_per_kwh", sa.Float(), nullable=True))
    op.add_column("sites", sa.Column("market", sa.String(length=40), nullable=True))
    op.create_table(
        "retrofit_options",
        sa.Column("id", sa.Integer(), nullable=False),
        sa.Column("version", sa.Integer(), server_default="1", nullable=False),
        sa.Column("code", sa.String(length=40), nullable=False),
        sa.Column("description", sa.String(length=300), nullable=True),
        sa.Column("kind", sa.String(length=12), nullable=False),
        sa.Column("lamp_type_id", sa.Integer(), nullable=True),
        sa.Column("area_id", sa.Integer(), nullable=True),
        sa.Column("kit_cost_per_unit", sa.Float(), nullable=False),
        sa.Column("labour_minutes_per_unit", sa.Float(), nullable=False),
        sa.Column("rebate_per_unit", sa.Float(), nullable=False),
        sa.Column("watts_per_unit", sa.Float(), nullable=False),
        sa.Column("lumens_per_unit", sa.Float(), nullable=False),
        sa.Column("l70_h", sa.Float(), nullable=False),
        sa.Column("failure_b10_h", sa.Float(), nullable=True),
        sa.Column("failure_shape", sa.Float(), nullable=True),
        sa.Column("retired_at", sa.DateTime(timezone=True), nullable=True),
        sa.Column(
            "created_at", sa.DateTime(timezone=True), server_default=sa.func.now(), nullable=False
        ),
        sa.Column(
            "updated_at", sa.DateTime(timezone=True), server_default=sa.func.now(), nullable=False
        ),
        sa.CheckConstraint("kind IN ('led_lamp', 'luminaire')", name=op.f("ck_retrofit_options_kind")),
        sa.CheckConstraint(
            "lamp_type_id IS NOT NULL OR area_id IS NOT NULL",
            name=op.f("ck_retrofit_options_lamp_type_or_area"),
        ),
        sa.ForeignKeyConstraint(
            ["area_id"], ["areas.id"], name=op.f("fk_retrofit_options_area_id_areas"),
            ondelete="CASCADE",
        ),
        sa.ForeignKeyConstraint(
            ["lamp_type_id"], ["lamp_types.id"],
            name=op.f("fk_retrofit_options_lamp_type_id_lamp_types"), ondelete="RESTRICT",
        ),
        sa.PrimaryKeyConstraint("id", name=op.f("pk_retrofit_options")),
        sa.UniqueConstraint("code", name=op.f("uq_retrofit_options_code")),
    )
    op.create_index(
        op.f("ix_retrofit_options_area_id"), "retrofit_options", ["area_id"], unique=False
    )
    op.create_index(
        op.f("ix_retrofit_options_lamp_type_id"), "retrofit_options", ["lamp_type_id"], unique=False
    )
    op.create_table(
        "lamp_choice_records",
        sa.Column("id", sa.Integer(), nullable=False),
        sa.Column("work_order_id", sa.Integer(), nullable=False),
        sa.Column("for_lamp_type_id", sa.Integer(), nullable=False),
        sa.Column("option_kind", sa.String(length=20), nullable=False),
        sa.Column("label", sa.String(length=200), nullable=False),
        sa.Column("lamp_type_id", sa.Integer(), nullable=True),
        sa.Column("retrofit_option_id", sa.Integer(), nullable=True),
        sa.Column("npv", sa.Float(), nullable=True),
        sa.Column(
            "created_at", sa.DateTime(timezone=True), server_default=sa.func.now(), nullable=False
        ),
        sa.ForeignKeyConstraint(
            ["lamp_type_id"], ["lamp_types.id"],
            name=op.f("fk_lamp_choice_records_lamp_type_id_lamp_types"), ondelete="RESTRICT",
        ),
        sa.ForeignKeyConstraint(
            ["retrofit_option_id"], ["retrofit_options.id"],
            name=op.f("fk_lamp_choice_records_retrofit_option_id_retrofit_options"),
            ondelete="RESTRICT",
        ),
        sa.ForeignKeyConstraint(
            ["work_order_id"], ["work_orders.id"],
            name=op.f("fk_lamp_choice_records_work_order_id_work_orders"), ondelete="CASCADE",
        ),
        sa.PrimaryKeyConstraint("id", name=op.f("pk_lamp_choice_records")),
        sa.ForeignKeyConstraint(
            ["for_lamp_type_id"], ["lamp_types.id"],
            name=op.f("fk_lamp_choice_records_for_lamp_type_id_lamp_types"), ondelete="RESTRICT",
        ),
        sa.UniqueConstraint(
            "work_order_id", "for_lamp_type_id",
            name=op.f("uq_lamp_choice_records_work_order_id_for_lamp_type_id"),
        ),
    )
    op.create_index(
        op.f("ix_lamp_choice_records_retrofit_option_id"),
        "lamp_choice_records",
        ["retrofit_option_id"],
        unique=False,
    )
    if op.get_bind().dialect.name == "sqlite":
        _feed().create_triggers(op, TRIGGER_TABLES)


def downgrade() -> None:
    op.drop_index(op.f("ix_lamp_choice_records_retrofit_option_id"), table_name="lamp_choice_records")
    op.drop_table("lamp_choice_records")
    op.drop_index(op.f("ix_retrofit_options_lamp_type_id"), table_name="retrofit_options")
    op.drop_index(op.f("ix_retrofit_options_area_id"), table_name="retrofit_options")
    op.drop_table("retrofit_options")
    sqlite = op.get_bind().dialect.name == "sqlite"
    if sqlite:  # the batch rebuilds below drop the triggers; they are re-made after
        _feed().drop_triggers(op, TRIGGER_TABLES)
    with op.batch_alter_table("sites") as batch:
        for col in ("market", "emission_factor_kg_per_kwh", "energy_escalation_rate", "discount_rate"):
            batch.drop_column(col)
    with op.batch_alter_table("lamp_types") as batch:
        for col in ("withdrawn_market", "withdrawn_after", "family"):
            batch.drop_column(col)
    if sqlite:
        _feed().create_triggers(op, TRIGGER_TABLES)
