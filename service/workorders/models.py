"""Work orders and their lines (one line per fixture)."""

from __future__ import annotations

from datetime import date, datetime
from typing import Any

from sqlalchemy import (
    JSON,
    Float,
    ForeignKey,
    Index,
    Integer,
    String,
    Text,
    UniqueConstraint,
    text,
)
from sqlalchemy.orm import Mapped, mapped_column, relationship

from service.db.base import Base, TimestampMixin

KINDS = ("group_relamp", "spot_replacement")
STATES = ("draft", "issued", "in_progress", "done", "cancelled")
OUTCOMES = ("replaced", "skipped")
OPEN_GROUP_SQL = "kind = 'group_relamp' AND state IN ('draft', 'issued', 'in_progress')"


class WorkOrder(TimestampMixin, Base):
    """One job for a team in one area: a group relamp or a batch of spot replacements."""

    __tablename__ = "work_orders"
    __table_args__ = (
        # The weekly run's idempotency key; manual orders have no week (NULLs never clash).
        UniqueConstraint("site_id", "iso_week", "area_id", "kind"),
        Index("ix_work_orders_updated", "updated_at"),
        Index("ix_work_orders_site_state", "site_id", "state"),
        # At most one open group order per area, enforced by the database, not a read.
        Index(
            "uq_work_orders_open_group_area",
            "area_id",
            unique=True,
            sqlite_where=text(OPEN_GROUP_SQL),
            postgresql_where=text(OPEN_GROUP_SQL),
        ),
    )

    id: Mapped[int] = mapped_column(primary_key=True)
    site_id: Mapped[int] = mapped_column(ForeignKey("sites.id", ondelete="RESTRICT"))
    area_id: Mapped[int] = mapped_column(ForeignKey("areas.id", ondelete="RESTRICT"), index=True)
    kind: Mapped[str] = mapped_column(String(20))
    state: Mapped[str] = mapped_column(String(12), default="draft")
    iso_week: Mapped[str | None] = mapped_column(String(8), default=None)  # e.g. 2026-W49
    run_id: Mapped[int | None] = mapped_column(
        ForeignKey("weekly_runs.id", ondelete="SET NULL"), default=None
    )
    due_on: Mapped[date | None] = mapped_column(default=None)  # site-local date
    access_method: Mapped[str] = mapped_column(String(10))
    lamp_quantity: Mapped[int] = mapped_column(Integer, default=0)
    estimated_labour_h: Mapped[float] = mapped_column(Float, default=0.0)  # hours
    disposal_instructions: Mapped[str] = mapped_column(Text, default="")
    safety_cautions: Mapped[str] = mapped_column(Text, default="")
    external_reference: Mapped[str | None] = mapped_column(String(200), default=None)
    notes: Mapped[str | None] = mapped_column(String(2000), default=None)
    state_changed_at: Mapped[datetime | None] = mapped_column(default=None)
    completed_at: Mapped[datetime | None] = mapped_column(default=None)
    cancel_reason: Mapped[str | None] = mapped_column(String(500), default=None)
    # The plan figures behind a group order (interval, binding reason, group age), for audit.
    plan: Mapped[dict[str, Any] | None] = mapped_column(JSON, default=None)
    # Bumped and checked by every UPDATE (optimistic lock): a stale writer gets 409.
    version: Mapped[int] = mapped_column(Integer, server_default="1")

    __mapper_args__ = {"version_id_col": version}

    lines: Mapped[list[WorkOrderLine]] = relationship(
        back_populates="order",
        order_by="WorkOrderLine.id",
        cascade="all, delete-orphan",
        passive_deletes=True,
    )


class WorkOrderLine(Base):
    """One fixture of an order: which positions, which lamp type, how many, and the outcome."""

    __tablename__ = "work_order_lines"

    id: Mapped[int] = mapped_column(primary_key=True)
    work_order_id: Mapped[int] = mapped_column(
        ForeignKey("work_orders.id", ondelete="CASCADE"), index=True
    )
    fixture_id: Mapped[int] = mapped_column(ForeignKey("fixtures.id", ondelete="RESTRICT"))
    fixture_tag: Mapped[str] = mapped_column(String(64))
    location: Mapped[str | None] = mapped_column(String(300), default=None)
    lamp_type_id: Mapped[int] = mapped_column(ForeignKey("lamp_types.id", ondelete="RESTRICT"))
    lamp_type_code: Mapped[str] = mapped_column(String(40))
    quantity: Mapped[int] = mapped_column(Integer)
    position_ids: Mapped[list[int]] = mapped_column(JSON)
    position_nos: Mapped[list[int]] = mapped_column(JSON)
    # Spot orders: the burnout reports this line answers.
    report_ids: Mapped[list[int] | None] = mapped_column(JSON, default=None)
    outcome: Mapped[str | None] = mapped_column(String(10), default=None)
    skip_reason: Mapped[str | None] = mapped_column(String(500), default=None)
    extra: Mapped[dict[str, Any] | None] = mapped_column(JSON, default=None)

    order: Mapped[WorkOrder] = relationship(back_populates="lines")
