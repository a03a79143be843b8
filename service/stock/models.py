"""Storerooms, the sites they serve, stock balances and the movement ledger."""

from __future__ import annotations

import enum
from datetime import datetime

from sqlalchemy import (
    CheckConstraint,
    Float,
    ForeignKey,
    Index,
    Integer,
    String,
    UniqueConstraint,
)
from sqlalchemy.orm import Mapped, mapped_column

from service.db.base import Base, TimestampMixin, UTCDateTime


class MovementKind(enum.StrEnum):
    """What a ledger movement records (its effect on on-hand and reserved lamps)."""

    RECEIVED = "received"  # on_hand + q: a delivery
    RETURNED = "returned"  # on_hand + q: unused lamps brought back to the shelf
    RESERVED = "reserved"  # reserved + q: held for an issued order
    RELEASED = "released"  # reserved - q: a reservation no longer needed
    ISSUED = "issued"  # on_hand - q (and its reservation - q): lamps taken out to fit
    COUNTED = "counted"  # on_hand set to a count: the only movement that may go below zero


class OrderPolicy(enum.StrEnum):
    """How an order quantity is chosen once stock falls to the reorder point."""

    EOQ = "eoq"  # economic order quantity from ordering and holding costs
    COVER_NEXT_GROUP = "cover_next_group"  # enough to cover demand through the next group relamp


KINDS = tuple(MovementKind)
POLICIES = tuple(OrderPolicy)


class Storeroom(TimestampMixin, Base):
    """A place lamps are kept: one per site by default, or shared by several sites."""

    __tablename__ = "storerooms"

    id: Mapped[int] = mapped_column(primary_key=True)
    name: Mapped[str] = mapped_column(String(200), unique=True)
    notes: Mapped[str | None] = mapped_column(String(2000), default=None)


class StoreroomSite(Base):
    """Which storeroom serves a site (a site has exactly one; a storeroom may serve many)."""

    __tablename__ = "storeroom_sites"

    site_id: Mapped[int] = mapped_column(
        ForeignKey("sites.id", ondelete="CASCADE"), primary_key=True
    )
    storeroom_id: Mapped[int] = mapped_column(
        ForeignKey("storerooms.id", ondelete="RESTRICT"), index=True
    )


class StockBalance(TimestampMixin, Base):
    """Lamps of one type in one storeroom: the ledger's running sums and reorder settings.

    Written only together with a movement, under a row lock (FOR UPDATE) and the version
    check, so two movements never lose an update.
    """

    __tablename__ = "stock_balances"
    __table_args__ = (
        UniqueConstraint("storeroom_id", "lamp_type_id"),
        CheckConstraint("reserved >= 0", name="reserved_not_negative"),
        CheckConstraint("pack_size >= 1", name="pack_size_positive"),
    )

    id: Mapped[int] = mapped_column(primary_key=True)
    storeroom_id: Mapped[int] = mapped_column(ForeignKey("storerooms.id", ondelete="RESTRICT"))
    lamp_type_id: Mapped[int] = mapped_column(
        ForeignKey("lamp_types.id", ondelete="RESTRICT"), index=True
    )
    on_hand: Mapped[int] = mapped_column(Integer, default=0)  # lamps on the shelf
    reserved: Mapped[int] = mapped_column(Integer, default=0)  # held for issued orders
    lead_time_weeks: Mapped[float] = mapped_column(Float, default=2.0)  # order to delivery
    pack_size: Mapped[int] = mapped_column(Integer, default=1)  # lamps per carton
    order_cost: Mapped[float] = mapped_column(Float, default=0.0)  # per purchase order
    holding_rate_per_year: Mapped[float] = mapped_column(Float, default=0.25)  # of unit cost
    unit_cost: Mapped[float | None] = mapped_column(Float, default=None)  # else the type's price
    policy: Mapped[str] = mapped_column(String(20), default=OrderPolicy.EOQ.value)
    version: Mapped[int] = mapped_column(Integer, server_default="1")

    __mapper_args__ = {"version_id_col": version}

    @property
    def available(self) -> int:
        """Lamps on the shelf not held for an order."""
        return self.on_hand - self.reserved


class StockMovement(Base):
    """One ledger entry: its effect on on-hand and reserved lamps, and why."""

    __tablename__ = "stock_movements"
    __table_args__ = (
        # A work-order hook writes each step once per lamp type: a retry never doubles.
        UniqueConstraint("work_order_id", "step", "lamp_type_id"),
        Index("ix_stock_movements_balance", "storeroom_id", "lamp_type_id", "id"),
    )

    id: Mapped[int] = mapped_column(primary_key=True)
    storeroom_id: Mapped[int] = mapped_column(ForeignKey("storerooms.id", ondelete="RESTRICT"))
    lamp_type_id: Mapped[int] = mapped_column(ForeignKey("lamp_types.id", ondelete="RESTRICT"))
    kind: Mapped[str] = mapped_column(String(10))
    quantity: Mapped[int] = mapped_column(Integer)  # lamps moved (a count: the lamps counted)
    on_hand_delta: Mapped[int] = mapped_column(Integer)
    reserved_delta: Mapped[int] = mapped_column(Integer)
    work_order_id: Mapped[int | None] = mapped_column(
        ForeignKey("work_orders.id", ondelete="RESTRICT"), default=None, index=True
    )
    step: Mapped[str | None] = mapped_column(String(20), default=None)  # the order's move
    note: Mapped[str | None] = mapped_column(String(500), default=None)
    at: Mapped[datetime] = mapped_column(UTCDateTime())
