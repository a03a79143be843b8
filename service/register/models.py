"""Sites, areas, fixtures and lamp positions."""

from __future__ import annotations

from datetime import date, datetime

from sqlalchemy import (
    Boolean,
    CheckConstraint,
    Float,
    ForeignKey,
    Index,
    Integer,
    String,
    UniqueConstraint,
    false,
)
from sqlalchemy.orm import Mapped, mapped_column, relationship

from service.db.base import Base, TimestampMixin

ACCESS_METHODS = ("floor", "ladder", "scaffold", "lift")


class Site(TimestampMixin, Base):
    """A building or campus with its own time zone, supply and tariffs."""

    __tablename__ = "sites"
    # Unique when set (NULLs never clash); an index, so SQLite adds it without a rebuild.
    __table_args__ = (Index("uq_sites_external_reference", "external_reference", unique=True),)

    id: Mapped[int] = mapped_column(primary_key=True)
    # Bumped by every ORM UPDATE (and checked in its WHERE): the ETag and If-Match value.
    version: Mapped[int] = mapped_column(Integer, server_default="1")
    __mapper_args__ = {"version_id_col": version}
    name: Mapped[str] = mapped_column(String(200), unique=True)
    time_zone: Mapped[str] = mapped_column(String(64))  # IANA name, e.g. Europe/Lisbon
    nominal_voltage_v: Mapped[float] = mapped_column(Float)  # volts at the outlets
    currency: Mapped[str] = mapped_column(String(3))  # ISO 4217 code
    energy_price_per_kwh: Mapped[float] = mapped_column(Float)
    labour_rate_per_h: Mapped[float] = mapped_column(Float)
    disposal_fee_per_mercury_lamp: Mapped[float] = mapped_column(Float, default=0.0)
    # Lamp choice (migration 0016): yearly discount rate and energy price escalation
    # (fractions), grid emission factor (kg CO2 per kWh; None: not reported) and the market
    # whose lamp withdrawals apply (None: every withdrawal applies).
    discount_rate: Mapped[float] = mapped_column(Float, default=0.05, server_default="0.05")
    energy_escalation_rate: Mapped[float] = mapped_column(Float, default=0.0, server_default="0")
    emission_factor_kg_per_kwh: Mapped[float | None] = mapped_column(Float, default=None)
    market: Mapped[str | None] = mapped_column(String(40), default=None)
    # The weekly relamping run, in the site's local time: 0 = Monday.
    weekly_run_weekday: Mapped[int] = mapped_column(Integer, default=0)
    weekly_run_time: Mapped[str] = mapped_column(String(5), default="06:00")  # HH:MM local
    lookahead_weeks: Mapped[int] = mapped_column(Integer, default=4)
    # Catch-up capacity per week for group relamps (planning.catch_up; None: no limit):
    # labour hours, and money in the site's currency (lamps, labour, hire, disposal).
    weekly_labour_h_capacity: Mapped[float | None] = mapped_column(Float, default=None)
    weekly_budget_capacity: Mapped[float | None] = mapped_column(Float, default=None)
    # The weekly run makes draft orders for a planner to issue, instead of issued ones.
    weekly_run_drafts: Mapped[bool] = mapped_column(Boolean, default=False, server_default=false())
    notes: Mapped[str | None] = mapped_column(String(2000), default=None)
    # The id a client's own system keeps for the site; unique when set (service.api.lookups).
    external_reference: Mapped[str | None] = mapped_column(String(200), default=None)
    # Set when retired: kept with its history, hidden from lists, no new work planned.
    retired_at: Mapped[datetime | None] = mapped_column(default=None)

    areas: Mapped[list[Area]] = relationship(back_populates="site", passive_deletes=True)


class Area(TimestampMixin, Base):
    """A part of a site relamped together: one access method, one operating schedule."""

    __tablename__ = "areas"
    __table_args__ = (
        UniqueConstraint("site_id", "name"),
        CheckConstraint(
            "access_method IN ('floor', 'ladder', 'scaffold', 'lift')", name="access_method"
        ),
    )

    id: Mapped[int] = mapped_column(primary_key=True)
    # Bumped by every ORM UPDATE (and checked in its WHERE): the ETag and If-Match value.
    version: Mapped[int] = mapped_column(Integer, server_default="1")
    __mapper_args__ = {"version_id_col": version}
    site_id: Mapped[int] = mapped_column(ForeignKey("sites.id", ondelete="CASCADE"), index=True)
    name: Mapped[str] = mapped_column(String(200))
    floor_or_zone: Mapped[str | None] = mapped_column(String(100), default=None)
    mounting_height_m: Mapped[float | None] = mapped_column(Float, default=None)  # metres
    access_method: Mapped[str] = mapped_column(String(10), default="ladder")
    group_minutes_per_lamp: Mapped[float] = mapped_column(Float, default=5.0)
    spot_minutes_per_lamp: Mapped[float] = mapped_column(Float, default=30.0)
    equipment_hire_per_visit: Mapped[float] = mapped_column(Float, default=0.0)
    # Schedule: either hours/day x days/week, or weekly burn hours given directly.
    hours_per_day: Mapped[float | None] = mapped_column(Float, default=None)
    days_per_week: Mapped[float | None] = mapped_column(Float, default=None)
    weekly_burn_hours: Mapped[float | None] = mapped_column(Float, default=None)
    starts_per_day: Mapped[float] = mapped_column(Float, default=1.0)
    light_floor: Mapped[float | None] = mapped_column(Float, default=None)  # fraction of initial
    burnout_ceiling: Mapped[float | None] = mapped_column(Float, default=None)  # share of positions
    # Luminaire dirt (reliability/dirt.py, CIE 97:2005 types and environments) and cleaning.
    luminaire_type: Mapped[str] = mapped_column(
        String(24), default="enclosed", server_default="enclosed"
    )
    dirt_environment: Mapped[str] = mapped_column(
        String(12), default="clean", server_default="clean"
    )
    # months between cleanings; None: cleaned only at group relamps (when those include it)
    cleaning_interval_months: Mapped[float | None] = mapped_column(
        Float, default=12.0, server_default="12"
    )
    # off by default: a yearly cleaning round already keeps the dirt; when on, the group
    # visit cleans too (its labour is a group cost and the dirt restarts at each relamp)
    relamp_includes_cleaning: Mapped[bool] = mapped_column(
        Boolean, default=False, server_default=false()
    )
    cleaning_minutes_per_fixture: Mapped[float] = mapped_column(
        Float, default=10.0, server_default="10"
    )
    last_cleaned_at: Mapped[datetime | None] = mapped_column(default=None)
    # Set when retired: kept with its history, hidden from lists, no new work planned.
    retired_at: Mapped[datetime | None] = mapped_column(default=None)

    site: Mapped[Site] = relationship(back_populates="areas")
    fixtures: Mapped[list[Fixture]] = relationship(back_populates="area", passive_deletes=True)

    @property
    def burn_hours_per_week(self) -> float:
        """Scheduled burn hours per week (0 when no schedule is set)."""
        if self.weekly_burn_hours is not None:
            return self.weekly_burn_hours
        if self.hours_per_day is not None and self.days_per_week is not None:
            return self.hours_per_day * self.days_per_week
        return 0.0

    @property
    def hours_per_start(self) -> float | None:
        """Mean burn hours per start from the schedule, None when unknown."""
        per_week = self.burn_hours_per_week
        days = self.days_per_week if self.days_per_week is not None else 7.0
        starts = self.starts_per_day * days
        if per_week <= 0 or starts <= 0:
            return None
        return per_week / starts


class Fixture(TimestampMixin, Base):
    """A luminaire holding one or more lamps of one type."""

    __tablename__ = "fixtures"
    __table_args__ = (
        UniqueConstraint("site_id", "tag"),
        Index("uq_fixtures_external_reference", "external_reference", unique=True),
    )

    id: Mapped[int] = mapped_column(primary_key=True)
    # Bumped by every ORM UPDATE (and checked in its WHERE): the ETag and If-Match value.
    version: Mapped[int] = mapped_column(Integer, server_default="1")
    __mapper_args__ = {"version_id_col": version}
    # site_id is kept beside area_id so the tag can be unique within the site.
    site_id: Mapped[int] = mapped_column(ForeignKey("sites.id", ondelete="CASCADE"))
    area_id: Mapped[int] = mapped_column(ForeignKey("areas.id", ondelete="CASCADE"), index=True)
    tag: Mapped[str] = mapped_column(String(64))
    location: Mapped[str | None] = mapped_column(String(300), default=None)
    lamp_type_id: Mapped[int] = mapped_column(
        ForeignKey("lamp_types.id", ondelete="RESTRICT"), index=True
    )
    lamps_per_fixture: Mapped[int] = mapped_column(Integer, default=1)
    ballast_kind: Mapped[str] = mapped_column(String(20), default="none")
    measured_voltage_v: Mapped[float | None] = mapped_column(Float, default=None)
    installed_on: Mapped[date | None] = mapped_column(default=None)
    # The id a client's own system keeps for the fixture; unique among fixtures when set.
    external_reference: Mapped[str | None] = mapped_column(String(200), default=None)
    # Set when retired: kept with its history, hidden from lists, no new work planned.
    retired_at: Mapped[datetime | None] = mapped_column(default=None)

    area: Mapped[Area] = relationship(back_populates="fixtures")
    positions: Mapped[list[LampPosition]] = relationship(
        back_populates="fixture",
        order_by="LampPosition.position_no",
        cascade="all, delete-orphan",
        passive_deletes=True,
    )


class LampPosition(Base):
    """One lamp socket of a fixture and the lamp now in it."""

    __tablename__ = "lamp_positions"
    __table_args__ = (
        UniqueConstraint("fixture_id", "position_no"),
        Index("ix_lamp_positions_installed", "lamp_installed_at"),
    )

    id: Mapped[int] = mapped_column(primary_key=True)
    # Bumped by every ORM UPDATE (and checked in its WHERE): the ETag and If-Match value.
    version: Mapped[int] = mapped_column(Integer, server_default="1")
    __mapper_args__ = {"version_id_col": version}
    fixture_id: Mapped[int] = mapped_column(ForeignKey("fixtures.id", ondelete="CASCADE"))
    position_no: Mapped[int] = mapped_column(Integer)  # 1..lamps_per_fixture
    # When the current lamp went in, and the burn hours and starts it already had then.
    lamp_installed_at: Mapped[datetime]
    hours_at_install: Mapped[float] = mapped_column(Float, default=0.0)
    starts_at_install: Mapped[float] = mapped_column(Float, default=0.0)
    # Dark since a burnout report, until a lamp goes back in.
    burned_out_at: Mapped[datetime | None] = mapped_column(default=None)

    fixture: Mapped[Fixture] = relationship(back_populates="positions")
