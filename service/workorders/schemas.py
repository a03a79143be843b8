"""Work order requests and responses."""

from __future__ import annotations

from datetime import date, datetime
from typing import TYPE_CHECKING, Any, ClassVar, Literal, Self

from pydantic import BaseModel, ConfigDict, Field, model_validator

from service.api.ids import Id
from service.api.times import Day, Timestamp
from service.workorders.models import LineOutcome, WorkOrderKind, WorkOrderState

Kind = WorkOrderKind
State = WorkOrderState


class WorkOrderCreate(BaseModel):
    """A hand-made order (a draft): a group relamp of a whole area, or its open burnouts."""

    model_config = ConfigDict(
        extra="forbid",
        allow_inf_nan=False,
        json_schema_extra={
            "examples": [
                {
                    "area_id": 3,
                    "kind": "group_relamp",
                    "due_on": "2026-12-14",
                    "notes": "Lift needed; bay closed 06:00-08:00.",
                    "external_reference": "CMMS-WO-2026-1187",
                }
            ]
        },
    )

    area_id: Id
    kind: Kind
    due_on: Day | None = Field(default=None, description="Site-local date (default: today).")
    notes: str | None = Field(default=None, max_length=2000)
    external_reference: str | None = Field(default=None, min_length=1, max_length=200)


class WorkOrderUpdate(BaseModel):
    """What a CMMS or a planner may change on an order at any state."""

    model_config = ConfigDict(extra="forbid", allow_inf_nan=False)

    external_reference: str | None = Field(default=None, max_length=200)
    notes: str | None = Field(default=None, max_length=2000)
    due_on: Day | None = None


# LineOutcome without "partial" (a line summary only); kept in step with it by a unit test.
PositionResult = Literal["replaced", "found_dark", "skipped"]


class LineRead(BaseModel):
    """One fixture of an order."""

    model_config = ConfigDict(from_attributes=True)

    id: int
    fixture_id: int
    fixture_tag: str
    location: str | None
    lamp_type_id: int
    lamp_type_code: str
    quantity: int
    position_ids: list[int]
    position_nos: list[int]
    report_ids: list[int] | None = Field(
        description="Burnout reports this line answers: its positions were reported dark."
    )
    outcome: LineOutcome | None = Field(
        description="replaced, skipped, or partial (some positions skipped); found_dark "
        "positions count as replaced."
    )
    skip_reason: str | None
    position_outcomes: list[PositionOutcomeRead] | None = None


class PositionOutcomeRead(BaseModel):
    """What happened at one lamp position, as recorded at completion."""

    position_id: int
    outcome: PositionResult
    reason: str | None = None


class WorkOrderRead(BaseModel):
    """A work order with its lines."""

    model_config = ConfigDict(from_attributes=True)

    id: int
    site_id: int
    area_id: int
    kind: Kind
    state: State
    allowed_next: list[str]
    iso_week: str | None
    run_id: int | None
    due_on: date | None
    access_method: str
    lamp_quantity: int
    estimated_labour_h: float
    disposal_instructions: str
    safety_cautions: str
    external_reference: str | None
    notes: str | None
    plan: dict[str, Any] | None
    version: int = Field(description="Bumped by every change; a stale writer gets 409.")
    state_changed_at: datetime | None
    completed_at: datetime | None
    cancel_reason: str | None
    covered_by_order_id: int | None = Field(
        default=None,
        description="Spot orders: the group order that took this one over (settles it when "
        "done, releases it when cancelled).",
    )
    covers: list[int] = Field(
        default_factory=list, description="Group orders: the spot orders this one covers."
    )
    created_at: datetime
    updated_at: datetime
    lines: list[LineRead] | None = None


class _SkipNeedsReason(BaseModel):
    """An outcome that may be `skipped`: then it needs a reason (what: "fixture", ...)."""

    what: ClassVar[str]
    if TYPE_CHECKING:  # the subclasses' fields, declared there (in their schema order)
        outcome: Any
        reason: str | None

    @model_validator(mode="after")
    def _reason_for_skips(self) -> Self:
        if self.outcome == LineOutcome.SKIPPED and not self.reason:
            raise ValueError(f"a skipped {self.what} needs a reason")
        return self


class FixtureOutcome(_SkipNeedsReason):
    """What happened at one fixture of the order."""

    what: ClassVar[str] = "fixture"

    model_config = ConfigDict(extra="forbid", allow_inf_nan=False)

    fixture_id: Id
    outcome: Literal[LineOutcome.REPLACED, LineOutcome.SKIPPED]
    reason: str | None = Field(default=None, min_length=1, max_length=500)


class PositionOutcome(_SkipNeedsReason):
    """What happened at one lamp position (overrides its fixture's outcome)."""

    what: ClassVar[str] = "position"

    model_config = ConfigDict(extra="forbid", allow_inf_nan=False)

    position_id: Id
    outcome: PositionResult = Field(
        description="replaced (was burning), found_dark (dark without a report: recorded as "
        "a failure), skipped (left in place; its age keeps running)."
    )
    reason: str | None = Field(default=None, min_length=1, max_length=500)


class CompleteBody(BaseModel):
    """Per-fixture and per-position outcomes; positions listed override their fixture's.

    A fixture neither listed nor with all its positions listed takes `others` (or the
    request is refused).
    """

    model_config = ConfigDict(extra="forbid", allow_inf_nan=False)

    outcomes: list[FixtureOutcome] = Field(default_factory=list, max_length=100_000)
    positions: list[PositionOutcome] = Field(default_factory=list, max_length=100_000)
    others: Literal[LineOutcome.REPLACED] | None = Field(
        default=None, description="Outcome of every fixture not listed."
    )
    completed_at: Timestamp | None = Field(default=None, description="Default: now.")


class CancelBody(BaseModel):
    """Why an order is cancelled."""

    model_config = ConfigDict(extra="forbid", allow_inf_nan=False)

    reason: str | None = Field(default=None, max_length=500)
