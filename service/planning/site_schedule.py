"""A site's catch-up schedule from its area plans: each due area's job, then planning.catch_up.

An area's job covers its lamp-type groups due within the look-ahead: labour hours (positions x
group minutes), cost without the hire (lamp, group labour, disposal per position), the area's
equipment hire for one visit and its access method. Its risk is the weeks until the first of
its groups reaches a safety limit at the area's burn rate: the light floor hours, the burnout
ceiling's B-life (the Weibull percentile at the ceiling share) or the rupture cap.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass
from datetime import date, timedelta

from service.planning.catch_up import Capacity, Committed, Job, Slot, schedule
from service.planning.service import AreaPlan, TypeGroup
from service.register.models import Site


def safety_limit_h(g: TypeGroup) -> float:
    """Burn hours at which the group first reaches a safety limit (inf: none set)."""
    gp = g.group
    limits = [h for h in (gp.light_floor_h, gp.rupture_cap_h) if h is not None]
    if g.cond.burnout_ceiling is not None:
        limits.append(float(gp.life.percentile(g.cond.burnout_ceiling)))
    return min(limits, default=math.inf)


def due_groups(plan: AreaPlan, horizon: date) -> list[TypeGroup]:
    """The area's groups due on or before the horizon."""
    return [g for g in plan.groups if g.due_on is not None and g.due_on <= horizon]


def job_of(plan: AreaPlan, today: date, horizon: date) -> Job | None:
    """The area's catch-up job (None when nothing is due by the horizon)."""
    groups = due_groups(plan, horizon)
    if not groups:
        return None
    due = min(g.due_on for g in groups if g.due_on is not None)
    weekly = plan.weekly_burn_hours  # burn hours per week
    risk = math.inf
    for g in groups:
        left_h = safety_limit_h(g) - g.group_age_h
        if math.isfinite(left_h) and weekly > 0:
            risk = min(risk, left_h / weekly)
    labour_h = sum(g.positions * g.costs.group_minutes_per_lamp / 60.0 for g in groups)
    cost = sum(
        g.positions * (g.costs.lamp_price + g.costs.group_labour + g.costs.disposal_fee_per_lamp)
        for g in groups
    )
    return Job(
        area_id=plan.area.id,
        access_method=plan.area.access_method,
        labour_h=labour_h,
        cost=cost,
        hire=float(plan.area.equipment_hire_per_visit),
        earliest_week=max((due - today).days, 0) // 7,
        risk_weeks=risk,
    )


@dataclass(frozen=True)
class SiteSchedule:
    """The catch-up slots of a site's due areas, by area id, and the capacity used."""

    capacity: Capacity
    jobs: dict[int, Job]
    slots: dict[int, Slot]
    today: date
    committed: tuple[Committed, ...] = ()  # open group orders of earlier weeks, in week 0

    def week_start(self, area_id: int) -> date | None:
        """The first day of the area's scheduled week (today for week 0)."""
        s = self.slots.get(area_id)
        return None if s is None else self.today + timedelta(weeks=s.week)


def capacity_of(site: Site) -> Capacity:
    """The site's weekly catch-up capacity (no limit where a setting is empty)."""
    return Capacity(labour_h=site.weekly_labour_h_capacity, budget=site.weekly_budget_capacity)


def site_schedule(
    site: Site,
    plans: Sequence[AreaPlan],
    today: date,
    horizon: date,
    committed: Sequence[Committed] = (),
) -> SiteSchedule:
    """The catch-up schedule of every area due by the horizon, at the site's capacity.

    committed: the site's group orders still open from earlier weeks (workorders.issue
    reads them), whose hours and money this week already carries.
    """
    cap = capacity_of(site)
    jobs = {j.area_id: j for p in plans if (j := job_of(p, today, horizon)) is not None}
    jobs = {a: j for a, j in jobs.items() if a not in {c.area_id for c in committed}}
    slots = {s.area_id: s for s in schedule(list(jobs.values()), cap, committed)}
    return SiteSchedule(cap, jobs, slots, today, tuple(committed))
