"""Lamp types: what the maker quotes, plus our model parameters."""

from __future__ import annotations

from datetime import date, datetime
from typing import Any

from sqlalchemy import (
    JSON,
    Boolean,
    CheckConstraint,
    Float,
    ForeignKey,
    Integer,
    String,
    UniqueConstraint,
)
from sqlalchemy.orm import Mapped, mapped_column
from sqlalchemy.sql import func

from service.db.base import Base, TimestampMixin, UTCDateTime, utcnow


class LampType(TimestampMixin, Base):
    """One catalogue entry; optional fields fall back to the technology defaults."""

    __tablename__ = "lamp_types"

    id: Mapped[int] = mapped_column(primary_key=True)
    # Bumped by every ORM UPDATE (and checked in its WHERE): the ETag and If-Match value.
    version: Mapped[int] = mapped_column(Integer, server_default="1")
    __mapper_args__ = {"version_id_col": version}
    code: Mapped[str] = mapped_column(String(40), unique=True)  # our own catalogue code
    description: Mapped[str | None] = mapped_column(String(300), default=None)
    technology: Mapped[str] = mapped_column(String(30))
    shape_designation: Mapped[str | None] = mapped_column(
        String(20), default=None
    )  # ANSI, e.g. A19
    base_designation: Mapped[str | None] = mapped_column(String(20), default=None)  # e.g. E26, G13
    rated_watts: Mapped[float] = mapped_column(Float)
    rated_volts: Mapped[float] = mapped_column(Float)
    rated_life_h: Mapped[float] = mapped_column(Float)
    rated_percentile: Mapped[float] = mapped_column(Float, default=50.0)  # B50 unless stated
    rated_hours_per_start: Mapped[float | None] = mapped_column(Float, default=None)
    second_hours_per_start: Mapped[float | None] = mapped_column(Float, default=None)
    second_cycle_life_h: Mapped[float | None] = mapped_column(Float, default=None)
    weibull_shape: Mapped[float | None] = mapped_column(Float, default=None)
    # [[% of rated life, % surviving], ...] from the maker's mortality curve.
    mortality_points: Mapped[list[list[float]] | None] = mapped_column(JSON, default=None)
    # [[hours or fraction of rated life, fraction of initial light], ...]
    lumen_points: Mapped[list[list[float]] | None] = mapped_column(JSON, default=None)
    lumen_basis: Mapped[str] = mapped_column(String(20), default="hours")
    initial_lumens: Mapped[float | None] = mapped_column(Float, default=None)
    life_exponent: Mapped[float | None] = mapped_column(Float, default=None)
    light_exponent: Mapped[float | None] = mapped_column(Float, default=None)
    power_exponent: Mapped[float | None] = mapped_column(Float, default=None)
    ballast_behaviour: Mapped[str | None] = mapped_column(String(20), default=None)
    driver_min_volts: Mapped[float | None] = mapped_column(Float, default=None)
    driver_max_volts: Mapped[float | None] = mapped_column(Float, default=None)
    # LED: B10 life of catastrophic (driver) failures, hours; rated_life_h is then L70.
    failure_b10_h: Mapped[float | None] = mapped_column(Float, default=None)
    # LED: LM-80-style test data [[hours, mean lumen fraction], ...], units, test hours.
    lm80_points: Mapped[list[list[float]] | None] = mapped_column(JSON, default=None)
    lm80_units: Mapped[int | None] = mapped_column(Integer, default=None)
    lm80_duration_h: Mapped[float | None] = mapped_column(Float, default=None)
    unit_price: Mapped[float] = mapped_column(Float, default=0.0)
    contains_mercury: Mapped[bool] = mapped_column(Boolean, default=False)
    rupture_risk: Mapped[bool] = mapped_column(Boolean, default=False)  # non-passive failure
    extra: Mapped[dict[str, Any] | None] = mapped_column(JSON, default=None)
    # Lamp choice (migration 0016): types of one family (e.g. "A19 100 W general service")
    # differ only in rated volts or make; plans offer the one rated nearest the measured supply.
    family: Mapped[str | None] = mapped_column(String(60), default=None)
    # Withdrawn from sale in a market from this date on: plans then ask for a replacement.
    withdrawn_after: Mapped[date | None] = mapped_column(default=None)
    withdrawn_market: Mapped[str | None] = mapped_column(String(40), default=None)  # None: all
    # Set when retired: kept for past orders and field fits, hidden from lists.
    retired_at: Mapped[datetime | None] = mapped_column(default=None)


RETROFIT_KINDS = ("led_lamp", "luminaire")


class RetrofitOption(TimestampMixin, Base):
    """An LED lamp or replacement luminaire offered in place of a lamp type (or in one area).

    Money in the site currency of the areas it is used in. Per unit (a lamp for an LED lamp,
    a fixture for a luminaire): kit cost, labour, rebate, watts and light output. Life model as LED lamp types have it: L70 (lumen life),
    failure B10 (catastrophic failures) and an optional Weibull shape of those failures.
    """

    __tablename__ = "retrofit_options"
    __table_args__ = (
        CheckConstraint("kind IN ('led_lamp', 'luminaire')", name="kind"),
        CheckConstraint(
            "lamp_type_id IS NOT NULL OR area_id IS NOT NULL", name="lamp_type_or_area"
        ),
    )

    id: Mapped[int] = mapped_column(primary_key=True)
    version: Mapped[int] = mapped_column(Integer, server_default="1")
    __mapper_args__ = {"version_id_col": version}
    code: Mapped[str] = mapped_column(String(40), unique=True)
    description: Mapped[str | None] = mapped_column(String(300), default=None)
    kind: Mapped[str] = mapped_column(String(12))
    # Offered in place of this lamp type (anywhere), or in this area (any of its lamp types).
    lamp_type_id: Mapped[int | None] = mapped_column(
        ForeignKey("lamp_types.id", ondelete="RESTRICT"), default=None, index=True
    )
    area_id: Mapped[int | None] = mapped_column(
        ForeignKey("areas.id", ondelete="CASCADE"), default=None, index=True
    )
    kit_cost_per_unit: Mapped[float] = mapped_column(Float)
    labour_minutes_per_unit: Mapped[float] = mapped_column(Float)
    rebate_per_unit: Mapped[float] = mapped_column(Float, default=0.0)
    watts_per_unit: Mapped[float] = mapped_column(Float)  # input watts, driver included
    lumens_per_unit: Mapped[float] = mapped_column(Float)  # initial light output
    l70_h: Mapped[float] = mapped_column(Float)  # burn hours to 70 % of initial light
    failure_b10_h: Mapped[float | None] = mapped_column(Float, default=None)  # None: = L70
    failure_shape: Mapped[float | None] = mapped_column(Float, default=None)  # None: LED default
    retired_at: Mapped[datetime | None] = mapped_column(default=None)


class LampChoiceRecord(Base):
    """The lamp choice a group work order names: history that keeps an option from deletion."""

    __tablename__ = "lamp_choice_records"
    __table_args__ = (UniqueConstraint("work_order_id", "for_lamp_type_id"),)

    id: Mapped[int] = mapped_column(primary_key=True)
    work_order_id: Mapped[int] = mapped_column(ForeignKey("work_orders.id", ondelete="CASCADE"))
    # The lamp type being relamped; the option chosen for it follows.
    for_lamp_type_id: Mapped[int] = mapped_column(ForeignKey("lamp_types.id", ondelete="RESTRICT"))
    option_kind: Mapped[str] = mapped_column(String(20))  # same_type, rated_for_voltage, retrofit
    label: Mapped[str] = mapped_column(String(200))
    lamp_type_id: Mapped[int | None] = mapped_column(
        ForeignKey("lamp_types.id", ondelete="RESTRICT"), default=None
    )
    retrofit_option_id: Mapped[int | None] = mapped_column(
        ForeignKey("retrofit_options.id", ondelete="RESTRICT"), default=None, index=True
    )
    npv: Mapped[float | None] = mapped_column(Float, default=None)  # site currency
    created_at: Mapped[datetime] = mapped_column(
        UTCDateTime(), default=utcnow, server_default=func.now(), nullable=False
    )
