"""The lamp choice a group work order names: computed when the order is built, recorded after.

Each due lamp type's best option (planning.choice: lowest life-cycle cost that can be bought
and keeps the light floor) goes into the order's plan figures as "lamp_choice", and one
LampChoiceRecord per (order, lamp type) keeps it as history (a retrofit option named there
is retired, never deleted). Areas with nothing to choose (no family, retrofit option or
withdrawal date on their types) cost the weekly run nothing: two queries per transaction
tell which areas have something to choose (planning.choice.alternatives_index).
The lines keep the current lamp type: fitting another one is the planner's decision.
"""

from __future__ import annotations

from typing import Any

from sqlalchemy import insert
from sqlalchemy.orm import Session

from service.catalogue.models import LampChoiceRecord
from service.planning.choice import area_choice, has_alternatives
from service.planning.service import AreaPlan


def order_choice(session: Session, plan: AreaPlan, types: set[int]) -> list[dict[str, Any]] | None:
    """The best option per due lamp type, as plain JSON for the order; None: nothing to choose."""
    if not has_alternatives(session, plan, cached=True):
        return None
    try:
        choices = area_choice(session, plan, lamp_type_ids=types)
    except ValueError as exc:  # the order still goes out; the reason is kept with it
        return [{"lamp_type_id": t, "note": f"lamp choice not available: {exc}"} for t in types]
    out = []
    for tc in choices:
        c, best = tc.comparison, tc.comparison.best
        entry: dict[str, Any] = {
            "lamp_type_id": tc.group.lamp_type_id,
            "replacement_required": c.replacement_required,
            "notes": list(c.notes),
        }
        if best is not None:
            entry.update(
                option_kind=best.option.kind,
                label=best.option.label,
                chosen_lamp_type_id=best.option.lamp_type_id,
                retrofit_option_id=best.option.retrofit_option_id,
                life_cycle_cost=round(best.life_cycle_cost, 2),
                saving_npv=round(best.saving_npv, 2),
                simple_payback_years=best.simple_payback_years,
            )
        out.append(entry)
    return out


def record_choices(session: Session, orders: list[tuple[int, dict[str, Any] | None]]) -> None:
    """One history row per (order, lamp type) whose plan figures name a chosen option."""
    rows = []
    for oid, plan in orders:
        for entry in (plan or {}).get("lamp_choice") or []:
            if "option_kind" not in entry:
                continue
            rows.append(
                {
                    "work_order_id": oid,
                    "for_lamp_type_id": entry["lamp_type_id"],
                    "option_kind": entry["option_kind"],
                    "label": entry["label"][:200],
                    "lamp_type_id": entry["chosen_lamp_type_id"],
                    "retrofit_option_id": entry["retrofit_option_id"],
                    "npv": entry["life_cycle_cost"],
                }
            )
    if rows:
        session.execute(insert(LampChoiceRecord), rows)
