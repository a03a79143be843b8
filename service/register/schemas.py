"""Request and response bodies for sites, areas, fixtures and lamp positions."""

from __future__ import annotations

import re
from datetime import date, datetime
from typing import Annotated, Literal
from zoneinfo import ZoneInfo, ZoneInfoNotFoundError, available_timezones

from fastapi import Query
from pydantic import (
    AfterValidator,
    BaseModel,
    ConfigDict,
    Field,
    field_validator,
    model_validator,
)

from service.api.ids import Id
from service.api.times import Day, Timestamp

AccessMethod = Literal["floor", "ladder", "scaffold", "lift"]
# At least 1 V: a near-zero supply makes the voltage power laws overflow.
Volts = Annotated[float, Field(ge=1, le=1000, description="Volts, in [1, 1000].")]
# Prices and rates in the site currency; the cap keeps cost sums finite.
Money = Annotated[float, Field(ge=0, le=1_000_000_000)]
Fraction = Annotated[float, Field(gt=0, lt=1)]
# CIE 97:2005 luminaire types A-F and environments (service/reliability/dirt.py).
LuminaireType = Literal[
    "bare_lamp",
    "open_top_reflector",
    "closed_top_reflector",
    "enclosed",
    "dustproof",
    "indirect_uplighter",
]
DirtEnvironment = Literal["very_clean", "clean", "normal", "dirty"]
CleaningMonths = Annotated[
    float,
    Field(ge=0.5, le=120, description="Months between luminaire cleanings (null: at relamps)."),
]


def _check_zone(name: str) -> str:
    # ZoneInfo also accepts file paths such as "../x"; insist on a listed IANA name.
    try:
        ZoneInfo(name)
    except (ZoneInfoNotFoundError, ValueError) as exc:
        raise ValueError(f"unknown IANA time zone '{name}'") from exc
    if name not in available_timezones() and name != "UTC":
        raise ValueError(f"unknown IANA time zone '{name}'")
    return name


def _check_hhmm(value: str) -> str:
    if not re.fullmatch(r"([01]\d|2[0-3]):[0-5]\d", value):
        raise ValueError("time must be HH:MM (24-hour)")
    return value


TimeZone = Annotated[str, AfterValidator(_check_zone)]
ClockTime = Annotated[str, AfterValidator(_check_hhmm)]
Currency = Annotated[str, Field(pattern=r"^[A-Z]{3}$", description="ISO 4217 code, e.g. EUR.")]
# List filter: a name fragment (sites, areas).
NameQ = Annotated[str | None, Query(description="Name contains (any case).")]


class SiteFields(BaseModel):
    """Fields a client may set on a site."""

    model_config = ConfigDict(extra="forbid", allow_inf_nan=False)

    name: str = Field(min_length=1, max_length=200)
    time_zone: TimeZone
    nominal_voltage_v: Volts
    currency: Currency
    energy_price_per_kwh: Money
    labour_rate_per_h: Money
    disposal_fee_per_mercury_lamp: Money = 0.0
    # Lamp choice (life-cycle cost of relamp options): yearly fractions and kg CO2 per kWh.
    discount_rate: float = Field(default=0.05, ge=0, le=1, description="Per year, e.g. 0.05.")
    energy_escalation_rate: float = Field(
        default=0.0, ge=-0.5, le=1, description="Energy price growth per year, e.g. 0.03."
    )
    emission_factor_kg_per_kwh: float | None = Field(
        default=None, ge=0, le=5, description="Grid kg CO2 per kWh; unset: CO2 not reported."
    )
    market: str | None = Field(
        default=None, min_length=1, max_length=40,
        description="Market whose lamp withdrawals apply (e.g. EU); unset: all apply.",
    )  # fmt: skip
    weekly_run_weekday: int = Field(default=0, ge=0, le=6, description="0 = Monday.")
    weekly_run_time: ClockTime = "06:00"
    lookahead_weeks: int = Field(default=4, ge=1, le=52)
    weekly_labour_h_capacity: float | None = Field(
        default=None,
        gt=0,
        le=100_000,
        description="Labour hours a week for group relamps; the catch-up schedule keeps to "
        "it (none: no limit).",
    )
    weekly_budget_capacity: float | None = Field(
        default=None,
        gt=0,
        le=1_000_000_000,
        description="Money a week for group relamps, in the site's currency (none: no limit).",
    )
    weekly_run_drafts: bool = Field(
        default=False,
        description="The weekly run makes draft orders for a planner to issue.",
    )
    notes: str | None = Field(default=None, max_length=2000)
    external_reference: str | None = Field(
        default=None,
        min_length=1,
        max_length=200,
        description="The id your own system keeps for it; unique among sites when set.",
    )


class SiteCreate(SiteFields):
    """A new site."""

    model_config = ConfigDict(
        json_schema_extra={
            "examples": [
                {
                    "name": "Northgate Depot",
                    "time_zone": "Europe/Lisbon",
                    "nominal_voltage_v": 230.0,
                    "currency": "EUR",
                    "energy_price_per_kwh": 0.21,
                    "labour_rate_per_h": 38.0,
                    "weekly_run_weekday": 0,
                    "weekly_run_time": "06:00",
                    "external_reference": "CMMS-SITE-0042",
                }
            ]
        }
    )


# Site fields a PATCH may change but not empty (every one but notes).
SITE_OPTIONAL = (
    "notes",
    "external_reference",
    "emission_factor_kg_per_kwh",
    "market",
    "weekly_labour_h_capacity",
    "weekly_budget_capacity",
)
SITE_REQUIRED = tuple(name for name in SiteFields.model_fields if name not in SITE_OPTIONAL)


class SiteUpdate(BaseModel):
    """A partial update of a site: only the fields sent change."""

    model_config = ConfigDict(extra="forbid", allow_inf_nan=False)

    name: str | None = Field(default=None, min_length=1, max_length=200)
    time_zone: TimeZone | None = None
    nominal_voltage_v: Volts | None = None
    currency: Currency | None = None
    energy_price_per_kwh: Money | None = None
    labour_rate_per_h: Money | None = None
    disposal_fee_per_mercury_lamp: Money | None = None
    discount_rate: float | None = Field(default=None, ge=0, le=1)
    energy_escalation_rate: float | None = Field(default=None, ge=-0.5, le=1)
    emission_factor_kg_per_kwh: float | None = Field(default=None, ge=0, le=5)
    market: str | None = Field(default=None, min_length=1, max_length=40)
    weekly_run_weekday: int | None = Field(default=None, ge=0, le=6)
    weekly_run_time: ClockTime | None = None
    lookahead_weeks: int | None = Field(default=None, ge=1, le=52)
    weekly_labour_h_capacity: float | None = Field(default=None, gt=0, le=100_000)
    weekly_budget_capacity: float | None = Field(default=None, gt=0, le=1_000_000_000)
    weekly_run_drafts: bool | None = None
    notes: str | None = Field(default=None, max_length=2000)
    external_reference: str | None = Field(default=None, min_length=1, max_length=200)

    @field_validator(*SITE_REQUIRED, mode="before")
    @classmethod
    def _not_emptied(cls, value: object) -> object:
        # Leaving a field out keeps it; sending null would empty a required column.
        if value is None:
            raise ValueError("cannot be null; leave the field out to keep it")
        return value


class SiteRead(SiteFields):
    """A stored site."""

    model_config = ConfigDict(from_attributes=True)

    id: int
    version: int = Field(description="Record version; the ETag, and what If-Match compares.")
    created_at: datetime
    updated_at: datetime
    retired_at: datetime | None = Field(
        default=None, description="When retired (kept with its history, hidden from lists)."
    )


class AreaFields(BaseModel):
    """Fields a client may set on an area."""

    model_config = ConfigDict(extra="forbid", allow_inf_nan=False)

    name: str = Field(min_length=1, max_length=200)
    floor_or_zone: str | None = Field(default=None, max_length=100)
    mounting_height_m: float | None = Field(default=None, gt=0, le=100)
    access_method: AccessMethod = "ladder"
    group_minutes_per_lamp: float = Field(default=5.0, ge=0, le=600)
    spot_minutes_per_lamp: float = Field(default=30.0, ge=0, le=600)
    equipment_hire_per_visit: Money = 0.0
    hours_per_day: float | None = Field(default=None, ge=0, le=24)
    days_per_week: float | None = Field(default=None, ge=0, le=7)
    weekly_burn_hours: float | None = Field(default=None, ge=0, le=168)
    starts_per_day: float = Field(default=1.0, ge=0, le=1000)
    light_floor: Fraction | None = None
    burnout_ceiling: Fraction | None = None
    luminaire_type: LuminaireType = Field(
        default="enclosed", description="CIE 97 luminaire type (A bare lamp ... F uplighter)."
    )
    dirt_environment: DirtEnvironment = "clean"
    cleaning_interval_months: CleaningMonths | None = 12.0
    relamp_includes_cleaning: bool = False
    cleaning_minutes_per_fixture: float = Field(default=10.0, ge=0, le=600)
    last_cleaned_at: Timestamp | None = Field(
        default=None, description="When the luminaires were last cleaned (without an offset: UTC)."
    )

    @model_validator(mode="after")
    def _schedule_pairs(self) -> AreaFields:
        if (self.hours_per_day is None) != (self.days_per_week is None):
            raise ValueError("give hours_per_day and days_per_week together")
        return self


class AreaCreate(AreaFields):
    """A new area in a site."""

    site_id: Id


class AreaUpdate(BaseModel):
    """A partial update of an area."""

    model_config = ConfigDict(extra="forbid", allow_inf_nan=False)

    name: str | None = Field(default=None, min_length=1, max_length=200)
    floor_or_zone: str | None = Field(default=None, max_length=100)
    mounting_height_m: float | None = Field(default=None, gt=0, le=100)
    access_method: AccessMethod | None = None
    group_minutes_per_lamp: float | None = Field(default=None, ge=0, le=600)
    spot_minutes_per_lamp: float | None = Field(default=None, ge=0, le=600)
    equipment_hire_per_visit: Money | None = None
    hours_per_day: float | None = Field(default=None, ge=0, le=24)
    days_per_week: float | None = Field(default=None, ge=0, le=7)
    weekly_burn_hours: float | None = Field(default=None, ge=0, le=168)
    starts_per_day: float | None = Field(default=None, ge=0, le=1000)
    light_floor: Fraction | None = None
    burnout_ceiling: Fraction | None = None
    luminaire_type: LuminaireType | None = None
    dirt_environment: DirtEnvironment | None = None
    cleaning_interval_months: CleaningMonths | None = None
    relamp_includes_cleaning: bool | None = None
    cleaning_minutes_per_fixture: float | None = Field(default=None, ge=0, le=600)
    last_cleaned_at: Timestamp | None = None


class AreaRead(AreaFields):
    """A stored area, with its derived weekly burn hours."""

    model_config = ConfigDict(from_attributes=True)

    id: int
    version: int = Field(description="Record version; the ETag, and what If-Match compares.")
    site_id: int
    burn_hours_per_week: float
    hours_per_start: float | None
    created_at: datetime
    updated_at: datetime
    retired_at: datetime | None = Field(
        default=None, description="When retired (kept with its history, hidden from lists)."
    )


class PositionRead(BaseModel):
    """A lamp position and when its current lamp went in."""

    model_config = ConfigDict(from_attributes=True)

    id: int
    version: int = Field(description="Record version; the ETag, and what If-Match compares.")
    fixture_id: int
    position_no: int
    lamp_installed_at: datetime
    hours_at_install: float
    starts_at_install: float
    burned_out_at: datetime | None


class PositionUpdate(BaseModel):
    """Correct when a position's lamp went in and what it had then."""

    model_config = ConfigDict(extra="forbid", allow_inf_nan=False)

    lamp_installed_at: Timestamp | None = None  # without an offset: UTC
    hours_at_install: float | None = Field(default=None, ge=0, le=1_000_000, allow_inf_nan=False)
    starts_at_install: float | None = Field(default=None, ge=0, le=100_000_000, allow_inf_nan=False)


BallastKind = Literal["none", "reactor", "regulating", "electronic", "led_driver"]


class FixtureFields(BaseModel):
    """Fields a client may set on a fixture."""

    model_config = ConfigDict(extra="forbid", allow_inf_nan=False)

    tag: str = Field(min_length=1, max_length=64)
    location: str | None = Field(default=None, max_length=300)
    lamp_type_id: Id
    lamps_per_fixture: int = Field(default=1, ge=1, le=64)
    # None: the lamp type's ballast behaviour (its catalogue value or technology default).
    ballast_kind: BallastKind | None = None
    measured_voltage_v: Volts | None = None
    installed_on: Day | None = None
    external_reference: str | None = Field(
        default=None,
        min_length=1,
        max_length=200,
        description="The id your own system keeps for it; unique among fixtures when set.",
    )


class FixtureCreate(FixtureFields):
    """A new fixture; its lamp positions are created with it."""

    model_config = ConfigDict(
        json_schema_extra={
            "examples": [
                {
                    "tag": "NG-B2-017",
                    "area_id": 3,
                    "lamp_type_id": 2,
                    "lamps_per_fixture": 2,
                    "location": "Bay 2, row C",
                    "installed_on": "2025-03-10",
                    "external_reference": "CMMS-ASSET-88120",
                }
            ]
        }
    )

    area_id: Id
    # When the lamps now in it went in (default: installed_on at 00:00 UTC, else now) and
    # their burn hours and starts then. A time without an offset is taken as UTC.
    lamps_installed_at: Timestamp | None = None
    lamp_hours_at_install: float = Field(default=0.0, ge=0, le=1_000_000, allow_inf_nan=False)
    lamp_starts_at_install: float = Field(default=0.0, ge=0, le=100_000_000, allow_inf_nan=False)


class FixtureUpdate(BaseModel):
    """A partial update of a fixture (positions follow lamps_per_fixture)."""

    model_config = ConfigDict(extra="forbid", allow_inf_nan=False)

    tag: str | None = Field(default=None, min_length=1, max_length=64)
    location: str | None = Field(default=None, max_length=300)
    area_id: Id | None = None
    lamp_type_id: Id | None = None
    lamps_per_fixture: int | None = Field(default=None, ge=1, le=64)
    ballast_kind: BallastKind | None = None
    measured_voltage_v: Volts | None = None
    installed_on: Day | None = None
    external_reference: str | None = Field(default=None, min_length=1, max_length=200)


class FixtureRead(BaseModel):
    """A stored fixture with its positions."""

    model_config = ConfigDict(from_attributes=True)

    id: int
    version: int = Field(description="Record version; the ETag, and what If-Match compares.")
    site_id: int
    area_id: int
    tag: str
    location: str | None
    lamp_type_id: int
    lamps_per_fixture: int
    ballast_kind: str
    measured_voltage_v: float | None
    installed_on: date | None
    external_reference: str | None = None
    positions: list[PositionRead]
    created_at: datetime
    updated_at: datetime
    retired_at: datetime | None = Field(
        default=None, description="When retired (kept with its history, hidden from lists)."
    )
