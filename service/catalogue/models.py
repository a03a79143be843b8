"""Lamp types: what the maker quotes, plus our model parameters."""

from __future__ import annotations

from datetime import datetime
from typing import Any

from sqlalchemy import JSON, Boolean, Float, Integer, String
from sqlalchemy.orm import Mapped, mapped_column

from service.db.base import Base, TimestampMixin


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
    # Set when retired: kept for past orders and field fits, hidden from lists.
    retired_at: Mapped[datetime | None] = mapped_column(default=None)
