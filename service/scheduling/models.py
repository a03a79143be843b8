"""Weekly run records: the per-(site, week) claim and every execution of a run."""

from __future__ import annotations

import enum
from datetime import datetime

from sqlalchemy import ForeignKey, Integer, String, Text, UniqueConstraint
from sqlalchemy.orm import Mapped, mapped_column

from service.db.base import Base, TimestampMixin

TRIGGERS = ("schedule", "catch_up", "api", "cli")


class RunOutcome(enum.StrEnum):
    """Where a weekly run stands: still running (under a lease), or finished."""

    RUNNING = "running"
    SUCCEEDED = "succeeded"
    FAILED = "failed"


OUTCOMES = tuple(RunOutcome)


class RunWeek(TimestampMixin, Base):
    """The claim on a site's ISO week: one row per (site, week), taken before any order."""

    __tablename__ = "run_weeks"
    __table_args__ = (UniqueConstraint("site_id", "iso_week"),)

    id: Mapped[int] = mapped_column(primary_key=True)
    site_id: Mapped[int] = mapped_column(ForeignKey("sites.id", ondelete="CASCADE"))
    iso_week: Mapped[str] = mapped_column(String(8))  # e.g. 2026-W49
    # Set when a run for this week has committed its orders.
    succeeded_at: Mapped[datetime | None] = mapped_column(default=None)


class WeeklyRun(Base):
    """One execution of the weekly run for a site (scheduled, caught up, or started by hand)."""

    __tablename__ = "weekly_runs"

    id: Mapped[int] = mapped_column(primary_key=True)
    site_id: Mapped[int] = mapped_column(ForeignKey("sites.id", ondelete="RESTRICT"), index=True)
    iso_week: Mapped[str] = mapped_column(String(8))
    trigger: Mapped[str] = mapped_column(String(10))
    started_at: Mapped[datetime]
    finished_at: Mapped[datetime | None] = mapped_column(default=None)
    outcome: Mapped[str] = mapped_column(String(10), default=RunOutcome.RUNNING)
    group_orders: Mapped[int] = mapped_column(Integer, default=0)
    spot_orders: Mapped[int] = mapped_column(Integer, default=0)
    orders_created: Mapped[int] = mapped_column(Integer, default=0)
    orders_already_there: Mapped[int] = mapped_column(Integer, default=0)
    error: Mapped[str | None] = mapped_column(Text, default=None)
    # The lease: a running run whose process stops heartbeating is reaped once it expires.
    lease_expires_at: Mapped[datetime | None] = mapped_column(default=None)
    heartbeat_at: Mapped[datetime | None] = mapped_column(default=None)
    owner: Mapped[str | None] = mapped_column(String(200), default=None)  # host:pid
