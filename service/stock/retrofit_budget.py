"""The budget's retrofit split: where an area's lamp choice picks a retrofit option.

planning.choice compares, per lamp type of an area, the same type, the type rated for the
measured voltage and each retrofit option, all from the next group relamp (today when the
type is spot only, as the choice counts it). Where the cheapest over the horizon is a
retrofit, the budget books at that relamp, under "retrofit": the kit (lamps), its labour,
one equipment hire per area visit, the removed lamps' disposal, cleaning, and the rebate
(negative); no group relamp of the old lamps then, and their spot replacements stop from the
first budget week starting on or after the retrofit day. From the retrofit on: energy at the
option's watts at the operating voltage, the option's own spot replacements (its renewal
count, lamp_choice.spot_counts) under "spot" and its group relamps, if due within the year,
under "group".
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from datetime import date

import numpy as np
from sqlalchemy.orm import Session

from service.planning.choice import area_choice, has_alternatives
from service.planning.lamp_choice import RETROFIT, OptionResult, spot_counts
from service.planning.service import AreaPlan, local_today


@dataclass(frozen=True)
class Retrofit:
    """A retrofit an area's lamp choice picks for one lamp type, and when it goes in."""

    day: date  # the relamp that fits it
    result: OptionResult  # the chosen option: its costs, units, plan and watts

    @property
    def units(self) -> int:
        """Units fitted: lamp positions for an LED lamp, fixtures for a luminaire."""
        return self.result.option.units


def chosen_retrofits(session: Session, plans: list[AreaPlan]) -> dict[tuple[int, int], Retrofit]:
    """(area, lamp type) -> the retrofit its lamp choice picks, for areas with options."""
    out: dict[tuple[int, int], Retrofit] = {}
    for plan in plans:
        if not has_alternatives(session, plan, cached=True):
            continue
        for tc in area_choice(session, plan):
            best = tc.comparison.best
            if best is None or best.option.kind != RETROFIT:
                continue
            g = tc.group
            day = g.due_on or local_today(plan.site, plan.as_of)
            out[(plan.area.id, g.lamp_type_id)] = Retrofit(day, best)
    return out


def first_week_after(day: date, first_week: date) -> int:
    """Index of the first budget week (weeks from first_week) starting on or after day."""
    return max(math.ceil((day - first_week).days / 7.0), 0)


def option_spot_lamps(rf: Retrofit, starts: list[date], weekly_h: float) -> np.ndarray:
    """Expected spot replacements of the fitted option in each budget month (all units)."""
    since = np.array([max((d - rf.day).days, 0) for d in starts], dtype=np.float64)
    per_unit = spot_counts(rf.result.plan, weekly_h * since / 7.0)  # burn hours since fitting
    lamps: np.ndarray = rf.units * np.diff(per_unit)
    return lamps


def energy_split_days(day: date, start: date, end: date) -> tuple[int, int]:
    """Days of [start, end) before the retrofit day and from it on."""
    before = min(max((day - start).days, 0), (end - start).days)
    return before, (end - start).days - before
