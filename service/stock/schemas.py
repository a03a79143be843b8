"""Request and response bodies for storerooms, stock balances, movements, demand and budget."""

from __future__ import annotations

from datetime import date, datetime
from typing import Annotated, Literal

from pydantic import BaseModel, ConfigDict, Field

from service.api.ids import Id

Money = Annotated[float, Field(ge=0, le=1_000_000_000)]
Lamps = Annotated[int, Field(ge=0, le=10_000_000, description="A number of lamps.")]
ManualKind = Literal["received", "returned", "issued", "counted"]
Policy = Literal["eoq", "cover_next_group"]
Currency = Annotated[str, Field(pattern=r"^[A-Z]{3}$", description="ISO 4217 code.")]


class _In(BaseModel):
    model_config = ConfigDict(extra="forbid", allow_inf_nan=False)


class StoreroomCreate(_In):
    """A storeroom and the sites it serves (each moves here from its former storeroom)."""

    name: str = Field(min_length=1, max_length=200)
    notes: str | None = Field(default=None, max_length=2000)
    site_ids: list[Id] = Field(default_factory=list, max_length=1000)


class StoreroomRead(BaseModel):
    """A storeroom with the sites it serves."""

    id: int
    name: str
    notes: str | None
    site_ids: list[int]
    created_at: datetime


class BalanceSettings(_In):
    """How a lamp type is stocked in a storeroom (creating the stock line if new)."""

    lead_time_weeks: float = Field(default=2.0, ge=0, le=104, description="Weeks to delivery.")
    pack_size: int = Field(default=1, ge=1, le=10_000, description="Lamps per carton.")
    order_cost: Money = Field(default=0.0, description="Cost of placing one purchase order.")
    holding_rate_per_year: float = Field(
        default=0.25, ge=0, le=5, description="Holding cost per year, fraction of unit cost."
    )
    unit_cost: Money | None = Field(default=None, description="Else the lamp type's price.")
    policy: Policy = "eoq"


class BalanceRead(BaseModel):
    """A lamp type's stock in a storeroom: on hand, reserved, available and settings."""

    model_config = ConfigDict(from_attributes=True)

    storeroom_id: int
    lamp_type_id: int
    on_hand: int
    reserved: int
    available: int
    lead_time_weeks: float
    pack_size: int
    order_cost: float
    holding_rate_per_year: float
    unit_cost: float | None
    policy: str
    version: int
    updated_at: datetime


class MovementCreate(_In):
    """A hand-made movement: a delivery, a return, lamps taken out, or a count of the shelf."""

    lamp_type_id: Id
    kind: ManualKind
    quantity: Lamps = Field(description="Lamps moved; for a count, the lamps counted.")
    note: str | None = Field(default=None, max_length=500)


class MovementRead(BaseModel):
    """One ledger entry."""

    model_config = ConfigDict(from_attributes=True)

    id: int
    storeroom_id: int
    lamp_type_id: int
    kind: str
    quantity: int
    on_hand_delta: int
    reserved_delta: int
    work_order_id: int | None
    step: str | None
    note: str | None
    at: datetime


class DemandWeek(BaseModel):
    """Lamps needed in one week: spot (mean and quantile), group, breakage, total."""

    week: int
    starts_on: date
    spot_mean: float
    spot_quantile: int
    group: int
    breakage: float
    total_mean: float


class DemandLine(BaseModel):
    """One lamp type's weekly demand in a storeroom."""

    lamp_type_id: int
    lamp_type_code: str
    positions: int
    method: str  # "exact" (Poisson-binomial by DFT) or "normal" (continuity-corrected)
    weeks: list[DemandWeek]


class DemandRead(BaseModel):
    """Weekly demand per lamp type over the horizon, at a service level."""

    storeroom_id: int
    as_of: datetime
    horizon_weeks: int
    service_level: float
    breakage_fraction: float
    lines: list[DemandLine]


class ToOrderLine(BaseModel):
    """A stocked lamp type: its reorder point and, when due, the quantity to order."""

    storeroom_id: int
    lamp_type_id: int
    lamp_type_code: str
    on_hand: int
    reserved: int
    available: int
    lead_time_weeks: float
    lead_time_demand_mean: float
    reorder_point: int
    policy: str
    order_quantity: int  # 0 when the available stock is above the reorder point
    pack_size: int
    unit_cost: float
    order_value: float
    annual_demand: float
    eoq: float | None
    next_group_week: int | None


class OutlookWeek(BaseModel):
    """Projected available lamps at the end of a week (mean demand, and at the quantile)."""

    week: int
    starts_on: date
    demand_mean: float
    received: int
    level_mean: float
    level_at_service_level: float


class OutlookRead(BaseModel):
    """The stock level week by week, with the suggested order arriving after the lead time."""

    storeroom_id: int
    lamp_type_id: int
    start_available: int
    order_quantity: int
    weeks: list[OutlookWeek]


class BudgetRequest(_In):
    """Budget options: a reporting currency with the user's rates, cleaning time, format."""

    reporting_currency: Currency | None = None
    # One unit of each site currency in the reporting currency, e.g. {"USD": 0.92}.
    rates: dict[Currency, Annotated[float, Field(gt=0, le=1_000_000)]] = Field(
        default_factory=dict, max_length=200
    )
    cleaning_minutes_per_lamp: float = Field(
        default=0.0, ge=0, le=240, description="Fixture cleaning at each group relamp, minutes."
    )
    format: Literal["json", "csv"] = "json"


class BudgetRow(BaseModel):
    """One month's amount of one category and split for one site."""

    site_id: int
    currency: str
    month: str
    split: str
    category: str
    amount: float
    reporting_currency: str | None = None
    reporting_amount: float | None = None


class BudgetRead(BaseModel):
    """Budget rows and, with a reporting currency, the portfolio's monthly totals in it."""

    months: int
    rows: list[BudgetRow]
    totals_by_month: dict[str, float] | None
