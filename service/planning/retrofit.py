"""Retrofit options: bodies and rules (create, read, delete without history, retire).

The table lives in the catalogue (catalogue.models.RetrofitOption); the rules live here,
above the register, because an option may name an area as well as a lamp type. An option a
group work order has named (catalogue.models.LampChoiceRecord) is history: it is retired,
never deleted. Services flush; the request's session commits.
"""

from __future__ import annotations

from datetime import datetime
from typing import Annotated, Literal

from pydantic import BaseModel, ConfigDict, Field, model_validator
from sqlalchemy import func, select
from sqlalchemy.exc import IntegrityError
from sqlalchemy.orm import Session

from service.api.errors import Conflict, Invalid
from service.api.ids import Id
from service.catalogue.models import LampChoiceRecord, LampType, RetrofitOption
from service.db.base import utcnow
from service.db.crud import get_or_404
from service.register.models import Area

Money = Annotated[float, Field(ge=0, le=1_000_000, allow_inf_nan=False)]
Hours = Annotated[float, Field(ge=100, le=1_000_000, allow_inf_nan=False, description="Hours.")]


class RetrofitOptionCreate(BaseModel):
    """A new retrofit option, offered in place of a lamp type, in one area, or both.

    Figures are per unit: one lamp for kind led_lamp (it replaces each lamp position), one
    fixture for kind luminaire (it replaces the whole fixture).
    """

    model_config = ConfigDict(extra="forbid", allow_inf_nan=False)

    code: str = Field(min_length=1, max_length=40)
    description: str | None = Field(default=None, max_length=300)
    kind: Literal["led_lamp", "luminaire"]
    lamp_type_id: Id | None = Field(default=None, description="Offered in place of this type.")
    area_id: Id | None = Field(default=None, description="Offered in this area.")
    kit_cost_per_unit: Money
    labour_minutes_per_unit: float = Field(ge=0, le=600, allow_inf_nan=False)
    rebate_per_unit: Money = 0.0
    watts_per_unit: float = Field(ge=0.1, le=10_000, allow_inf_nan=False)
    lumens_per_unit: float = Field(gt=0, le=1_000_000, allow_inf_nan=False)
    l70_h: Hours = Field(description="Burn hours to 70 % of initial light (L70).")
    failure_b10_h: Hours | None = Field(
        default=None, description="Hours by which 10 % have failed; unset: the L70 hours."
    )
    failure_shape: float | None = Field(
        default=None, ge=0.5, le=10, description="Weibull shape of failures; unset: LED default."
    )

    @model_validator(mode="after")
    def _somewhere(self) -> RetrofitOptionCreate:
        if self.lamp_type_id is None and self.area_id is None:
            raise ValueError("give lamp_type_id, area_id or both")
        if self.rebate_per_unit > self.kit_cost_per_unit:
            raise ValueError("rebate_per_unit must not exceed kit_cost_per_unit")
        return self


class RetrofitOptionRead(BaseModel):
    """A stored retrofit option."""

    model_config = ConfigDict(from_attributes=True)

    id: int
    version: int
    code: str
    description: str | None
    kind: str
    lamp_type_id: int | None
    area_id: int | None
    kit_cost_per_unit: float
    labour_minutes_per_unit: float
    rebate_per_unit: float
    watts_per_unit: float
    lumens_per_unit: float
    l70_h: float
    failure_b10_h: float | None
    failure_shape: float | None
    created_at: datetime
    updated_at: datetime
    retired_at: datetime | None


def _missing(field: str, what: str, value: int) -> Invalid:
    return Invalid(
        f"{what} {value} does not exist.",
        errors=[{"field": field, "in": "body", "message": f"no {what} with this id"}],
    )


def create_option(session: Session, body: RetrofitOptionCreate) -> RetrofitOption:
    """Add a retrofit option; codes are unique, the lamp type and area must exist."""
    if body.lamp_type_id is not None and session.get(LampType, body.lamp_type_id) is None:
        raise _missing("lamp_type_id", "lamp type", body.lamp_type_id)
    if body.area_id is not None and session.get(Area, body.area_id) is None:
        raise _missing("area_id", "area", body.area_id)
    taken = session.scalar(select(RetrofitOption.id).where(RetrofitOption.code == body.code))
    if taken is not None:
        raise Conflict(f"A retrofit option with code '{body.code}' already exists.", field="code")
    opt = RetrofitOption(**body.model_dump())
    session.add(opt)
    try:
        with session.begin_nested():
            session.flush()
    except IntegrityError:  # a concurrent create took the code
        raise Conflict(
            f"A retrofit option with code '{body.code}' already exists.", field="code"
        ) from None
    return opt


def get_option(session: Session, option_id: int) -> RetrofitOption:
    """A retrofit option by id (404 if missing)."""
    return get_or_404(session, RetrofitOption, option_id, "retrofit option")


def list_options(
    session: Session, lamp_type_id: int | None, area_id: int | None, include_retired: bool
) -> list[RetrofitOption]:
    """Options by id, filtered by lamp type or area; retired ones only when asked."""
    q = select(RetrofitOption).order_by(RetrofitOption.id)
    if lamp_type_id is not None:
        q = q.where(RetrofitOption.lamp_type_id == lamp_type_id)
    if area_id is not None:
        q = q.where(RetrofitOption.area_id == area_id)
    if not include_retired:
        q = q.where(RetrofitOption.retired_at.is_(None))
    return list(session.scalars(q))


def times_named(session: Session, option_id: int) -> int:
    """How many work orders named this option as their lamp choice."""
    q = select(func.count(LampChoiceRecord.id)).where(
        LampChoiceRecord.retrofit_option_id == option_id
    )
    return int(session.scalar(q) or 0)


def delete_option(session: Session, option_id: int) -> None:
    """Delete an option no work order has named (409 otherwise: retire it instead)."""
    opt = get_option(session, option_id)
    n = times_named(session, option_id)
    if n:
        raise Conflict(
            f"Retrofit option '{opt.code}' is named by {n} work order(s); retire it instead.",
            work_orders=n,
        )
    try:
        with session.begin_nested():
            session.delete(opt)
            session.flush()
    except IntegrityError:  # a work order named it meanwhile
        raise Conflict(
            f"Retrofit option '{opt.code}' is named by a work order; retire it instead."
        ) from None


def retire_option(session: Session, option_id: int) -> RetrofitOption:
    """Retire an option: kept for the orders that named it, offered no more; repeats are no-ops."""
    opt = get_option(session, option_id)
    if opt.retired_at is None:
        opt.retired_at = utcnow()
        session.flush()
    return opt
