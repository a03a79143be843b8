"""Work orders and their lines (one line per fixture)."""

from __future__ import annotations

import enum
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


class WorkOrderKind(enum.StrEnum):
    """What an order asks a team to do."""

    GROUP_RELAMP = "group_relamp"
    SPOT_REPLACEMENT = "spot_replacement"


class WorkOrderState(enum.StrEnum):
    """Where an order stands (moves: service.workorders.service.TRANSITIONS)."""

    DRAFT = "draft"
    ISSUED = "issued"
    IN_PROGRESS = "in_progress"
    DONE = "done"
    CANCELLED = "cancelled"


class LineOutcome(enum.StrEnum):
    """What happened at a lamp position (or, summed up, at a line's fixture)."""

    REPLACED = "replaced"  # the lamp was burning when taken out
    FOUND_DARK = "found_dark"  # dark on arrival without a report: a failure
    SKIPPED = "skipped"  # left in place (its age keeps running); needs a reason
    PARTIAL = "partial"  # line only: some positions of the fixture skipped, some not


KINDS = tuple(WorkOrderKind)
STATES = tuple(WorkOrderState)
OUTCOMES = tuple(LineOutcome)
OPEN_STATES = (WorkOrderState.DRAFT, WorkOrderState.ISSUED, WorkOrderState.IN_PROGRESS)
OPEN_GROUP_SQL = "kind = 'group_relamp' AND state IN ('draft', 'issued', 'in_progress')"


class WorkOrder(TimestampMixin, Base):
    """One job for a team in one area: a group relamp or a batch of spot replacements."""

    __tablename__ = "work_orders"
    __table_args__ = (
        # The weekly run's idempotency key; manual orders have no week (NULLs never clash).
        UniqueConstraint("site_id", "iso_week", "area_id", "kind"),
        Index("ix_work_orders_updated", "updated_at"),
        Index("ix_work_orders_site_state", "site_id", "state"),
        # The CMMS's id for the order, unique when set (migration 0014).
        Index("uq_work_orders_external_reference", "external_reference", unique=True),
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
    state: Mapped[str] = mapped_column(String(12), default=WorkOrderState.DRAFT.value)
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
    # The id the client's CMMS keeps for the order; unique when set (migration 0014).
    external_reference: Mapped[str | None] = mapped_column(String(200), default=None)
    notes: Mapped[str | None] = mapped_column(String(2000), default=None)
    state_changed_at: Mapped[datetime | None] = mapped_column(default=None)
    completed_at: Mapped[datetime | None] = mapped_column(default=None)
    cancel_reason: Mapped[str | None] = mapped_column(String(500), default=None)
    # The plan figures behind a group order (interval, binding reason, group age), for audit.
    plan: Mapped[dict[str, Any] | None] = mapped_column(JSON, default=None)
    # A spot order a group order took over (same area): settled or released with it.
    covered_by_order_id: Mapped[int | None] = mapped_column(
        ForeignKey("work_orders.id", ondelete="SET NULL"), default=None, index=True
    )
    # Bumped and checked by every UPDATE (optimistic lock): a stale writer gets 409.
    version: Mapped[int] = mapped_column(Integer, server_default="1")

    __mapper_args__ = {"version_id_col": version}

    lines: Mapped[list[WorkOrderLine]] = relationship(
        back_populates="order",
        order_by="WorkOrderLine.id",
        cascade="all, delete-orphan",
        passive_deletes=True,
    )
    # The spot orders this group order covers (read only: set through covered_by_order_id).
    covered: Mapped[list[WorkOrder]] = relationship(
        foreign_keys=[covered_by_order_id], order_by="WorkOrder.id", viewonly=True
    )

    @property
    def covers(self) -> list[int]:
        """Ids of the spot orders this order covers."""
        return [o.id for o in self.covered]


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
    # The burnout reports this line answers (its positions were reported dark).
    report_ids: Mapped[list[int] | None] = mapped_column(JSON, default=None)
    outcome: Mapped[str | None] = mapped_column(String(10), default=None)
    skip_reason: Mapped[str | None] = mapped_column(String(500), default=None)
    # At completion: [{"position_id", "outcome", "reason"}] in position order.
    position_outcomes: Mapped[list[dict[str, Any]] | None] = mapped_column(JSON, default=None)
    extra: Mapped[dict[str, Any] | None] = mapped_column(JSON, default=None)

    order: Mapped[WorkOrder] = relationship(back_populates="lines")
