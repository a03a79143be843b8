"""Burnout reports and lamp removals (the survival observations of the field fit)."""

from __future__ import annotations

import enum
from datetime import datetime

from sqlalchemy import Boolean, Float, ForeignKey, Index, Integer, String
from sqlalchemy.orm import Mapped, mapped_column

from service.db.base import Base, TimestampMixin

REMOVAL_REASONS = ("burnout", "group_relamp", "spot_relamp", "damage", "upgrade", "other")


class BurnoutReportState(enum.StrEnum):
    """A report's life: changed only by service.events.reports."""

    OPEN = "open"  # dark, no order has taken it in
    ORDERED = "ordered"  # on an open work order (spot, or a group order's reported-dark line)
    CLOSED = "closed"  # a replacement dealt with it


REPORT_STATES = tuple(BurnoutReportState)


class BurnoutReport(TimestampMixin, Base):
    """A lamp reported dark; open until a replacement is recorded."""

    __tablename__ = "burnout_reports"
    __table_args__ = (Index("ix_burnout_reports_open", "status", "area_id"),)

    id: Mapped[int] = mapped_column(primary_key=True)
    site_id: Mapped[int] = mapped_column(ForeignKey("sites.id", ondelete="RESTRICT"), index=True)
    area_id: Mapped[int] = mapped_column(ForeignKey("areas.id", ondelete="RESTRICT"))
    fixture_id: Mapped[int] = mapped_column(ForeignKey("fixtures.id", ondelete="RESTRICT"))
    position_id: Mapped[int] = mapped_column(
        ForeignKey("lamp_positions.id", ondelete="RESTRICT"), index=True
    )
    reported_at: Mapped[datetime]
    burn_hours: Mapped[float | None] = mapped_column(Float, default=None)  # if the team knows
    status: Mapped[str] = mapped_column(String(10), default=BurnoutReportState.OPEN.value)
    # Set when a spot work order takes the report in (no FK: work orders come later).
    work_order_id: Mapped[int | None] = mapped_column(Integer, default=None, index=True)
    note: Mapped[str | None] = mapped_column(String(500), default=None)
    # The failure observation this report recorded (one per lamp, never counted twice).
    removal_id: Mapped[int | None] = mapped_column(
        ForeignKey("lamp_removals.id", ondelete="SET NULL"), default=None
    )
    closed_at: Mapped[datetime | None] = mapped_column(default=None)
    # Bumped and checked by every UPDATE (optimistic lock; Core updates bump it by hand).
    version: Mapped[int] = mapped_column(Integer, server_default="1")

    __mapper_args__ = {"version_id_col": version}


class LampRemoval(Base):
    """A lamp taken out: failed (burned out) or censored (removed still burning)."""

    __tablename__ = "lamp_removals"
    __table_args__ = (Index("ix_lamp_removals_type", "lamp_type_id", "site_id"),)

    id: Mapped[int] = mapped_column(primary_key=True)
    site_id: Mapped[int] = mapped_column(ForeignKey("sites.id", ondelete="RESTRICT"))
    fixture_id: Mapped[int] = mapped_column(ForeignKey("fixtures.id", ondelete="RESTRICT"))
    position_id: Mapped[int] = mapped_column(ForeignKey("lamp_positions.id", ondelete="RESTRICT"))
    lamp_type_id: Mapped[int] = mapped_column(ForeignKey("lamp_types.id", ondelete="RESTRICT"))
    installed_at: Mapped[datetime]
    removed_at: Mapped[datetime]
    burn_hours: Mapped[float] = mapped_column(Float)  # actual burn hours at removal
    starts: Mapped[float | None] = mapped_column(Float, default=None)
    operating_voltage_v: Mapped[float | None] = mapped_column(Float, default=None)
    # burn_hours x the life acceleration factor: rated-voltage-equivalent hours.
    normalised_hours: Mapped[float] = mapped_column(Float)
    # Found dark without a report: failed after this many normalised hours (the last time
    # it was known burning) and by normalised_hours; None for exact failures and survivors.
    failed_after_normalised_hours: Mapped[float | None] = mapped_column(Float, default=None)
    failed: Mapped[bool] = mapped_column(Boolean)
    reason: Mapped[str] = mapped_column(String(20))
    work_order_id: Mapped[int | None] = mapped_column(Integer, default=None)
    created_at: Mapped[datetime]
