"""The lamp-choice brief an area plan carries (its own module: plan schemas import it)."""

from __future__ import annotations

from pydantic import BaseModel, Field


class LampChoiceBrief(BaseModel):
    """The best option for one lamp type, as the area plan shows it."""

    lamp_type_id: int
    best_label: str | None
    best_kind: str | None
    saving_npv: float | None = Field(description="Over the horizon, against the same type.")
    simple_payback_years: float | None
    replacement_required: bool
    notes: list[str]
