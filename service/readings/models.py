"""Burn-hour records and voltage readings, each for one fixture or one whole area."""

from __future__ import annotations

from datetime import datetime

from sqlalchemy import Boolean, CheckConstraint, Float, ForeignKey, Index, Integer, String, func
from sqlalchemy.orm import Mapped, mapped_column

from service.db.base import Base, UTCDateTime, utcnow

RECORD_KINDS = ("period", "counter")


class BurnHourRecord(Base):
    """Burn hours (and starts) in one period, for a fixture or for every fixture of an area.

    Counter readings are stored as the increment since the previous reading of the same
    meter, with the raw counter value kept beside it; a target's records never overlap.
    """

    __tablename__ = "burn_hour_records"
    __table_args__ = (
        CheckConstraint("(area_id IS NULL) <> (fixture_id IS NULL)", name="one_target"),
        CheckConstraint("kind IN ('period', 'counter')", name="kind"),
        Index("ix_burn_hour_records_fixture_end", "fixture_id", "period_end"),
        Index("ix_burn_hour_records_area_end", "area_id", "period_end"),
    )

    id: Mapped[int] = mapped_column(primary_key=True)
    # The target's site, copied for filtering. No foreign key on purpose: the area or fixture
    # key already cascades from the site, and a second per-row key check halves COPY speed.
    site_id: Mapped[int] = mapped_column(Integer, index=True)
    area_id: Mapped[int | None] = mapped_column(
        ForeignKey("areas.id", ondelete="RESTRICT"), default=None
    )
    fixture_id: Mapped[int | None] = mapped_column(
        ForeignKey("fixtures.id", ondelete="RESTRICT"), default=None
    )
    kind: Mapped[str] = mapped_column(String(10))
    period_start: Mapped[datetime]
    period_end: Mapped[datetime]
    hours: Mapped[float] = mapped_column(Float)  # burn hours in the period
    starts: Mapped[float | None] = mapped_column(Float, default=None)  # starts in the period
    counter_hours: Mapped[float | None] = mapped_column(Float, default=None)  # raw meter value
    counter_starts: Mapped[float | None] = mapped_column(Float, default=None)
    counter_reset: Mapped[bool] = mapped_column(Boolean, default=False)
    created_at: Mapped[datetime] = mapped_column(
        UTCDateTime(), default=utcnow, server_default=func.now()
    )


class VoltageReading(Base):
    """A supply voltage measured at a fixture, or on an area's circuit, at a moment."""

    __tablename__ = "voltage_readings"
    __table_args__ = (
        CheckConstraint("(area_id IS NULL) <> (fixture_id IS NULL)", name="one_target"),
        Index("ix_voltage_readings_fixture_at", "fixture_id", "measured_at"),
        Index("ix_voltage_readings_area_at", "area_id", "measured_at"),
    )

    id: Mapped[int] = mapped_column(primary_key=True)
    site_id: Mapped[int] = mapped_column(ForeignKey("sites.id", ondelete="RESTRICT"), index=True)
    area_id: Mapped[int | None] = mapped_column(
        ForeignKey("areas.id", ondelete="RESTRICT"), default=None
    )
    fixture_id: Mapped[int | None] = mapped_column(
        ForeignKey("fixtures.id", ondelete="RESTRICT"), default=None
    )
    measured_at: Mapped[datetime]
    volts: Mapped[float] = mapped_column(Float)
    note: Mapped[str | None] = mapped_column(String(300), default=None)
    created_at: Mapped[datetime] = mapped_column(
        UTCDateTime(), default=utcnow, server_default=func.now()
    )
