"""The catch-up schedule: due group relamps spread over the coming weeks within a site's capacity.

Pure (no database). Each job is one area's group relamp: labour hours, its cost without the
equipment hire, the hire of one visit, its access method, the first week it may go in (its
due week; 0 = this week) and its risk: weeks until its first safety limit (light floor,
burnout ceiling, rupture cap) is reached, negative when already past.

Rule (greedy, earliest risk first): jobs are taken by (risk weeks, due week, area id); each
goes into the first week from its due week on where the week's labour hours and money stay
within the capacity. Jobs of one access method in one week share a visit and one hire (one
lift or scaffold hire a week per access method and site): the visit costs the largest hire
of its jobs, so a job joining it pays only what its own hire adds, usually nothing. A job
that alone exceeds a week's capacity gets an empty week of its own and is flagged
(over_capacity): it needs splitting or more capacity, and nothing else joins that week.
Capacity None means no limit on that measure.

Work already committed: group orders still open from earlier weeks (or made by hand) are
due now and are done by the same crew, so their labour hours and money (their hire
included) are loaded into this week (week 0) before any job is placed, and each opens its
access method's visit there (a job on the same access method this week shares that hire).
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass

MAX_WEEKS = 520  # a schedule further out than ten years is no plan


@dataclass(frozen=True)
class Job:
    """One area's group relamp to place."""

    area_id: int
    access_method: str
    labour_h: float  # hours
    cost: float  # lamps, labour, disposal: everything but the hire (site currency)
    hire: float  # equipment hire for one visit (site currency)
    earliest_week: int  # its due week: 0 = this week
    risk_weeks: float = math.inf  # weeks to its first safety limit (negative: past it)


@dataclass(frozen=True)
class Committed:
    """An open group order of an earlier week: load this week carries before any job."""

    area_id: int
    access_method: str
    labour_h: float  # hours
    cost: float  # lamps, labour, disposal (site currency)
    hire: float  # the area's equipment hire for one visit (site currency)


@dataclass(frozen=True)
class Capacity:
    """A site's weekly capacity for group relamps (None: no limit)."""

    labour_h: float | None = None
    budget: float | None = None

    @property
    def limited(self) -> bool:
        """True when either measure has a limit."""
        return self.labour_h is not None or self.budget is not None


@dataclass(frozen=True)
class Slot:
    """Where a job went."""

    area_id: int
    week: int  # weeks from this week
    order: int  # its place in the risk order (0: riskiest)
    hire_charged: float  # what it adds to the visit's hire (0 when it shares an equal one)
    shares_visit_with: int | None  # the area whose visit (and hire) it joins
    over_capacity: bool = False


@dataclass
class _Week:
    labour_h: float = 0.0
    money: float = 0.0
    full: bool = False
    # access method -> (the area that opened the visit, the visit's hire so far)
    visits: dict[str, tuple[int, float]] | None = None


def risk_order(jobs: Sequence[Job]) -> list[Job]:
    """Jobs earliest risk first, then by due week and area id."""
    return sorted(jobs, key=lambda j: (j.risk_weeks, j.earliest_week, j.area_id))


def _fits(cap: Capacity, wk: _Week, labour: float, money: float) -> bool:
    if wk.full:
        return False
    ok_labour = cap.labour_h is None or wk.labour_h + labour <= cap.labour_h + 1e-9
    ok_money = cap.budget is None or wk.money + money <= cap.budget + 1e-9
    return ok_labour and ok_money


def _alone_too_big(cap: Capacity, job: Job) -> bool:
    over_labour = cap.labour_h is not None and job.labour_h > cap.labour_h + 1e-9
    over_money = cap.budget is not None and job.cost + job.hire > cap.budget + 1e-9
    return over_labour or over_money


def _preload(committed: Sequence[Committed]) -> _Week:
    """This week with the committed orders in it: their hours, money and visits."""
    wk = _Week(visits={})
    visits: dict[str, tuple[int, float]] = {}
    for c in sorted(committed, key=lambda c: c.area_id):
        opener, paid = visits.get(c.access_method, (c.area_id, 0.0))
        hire = max(c.hire - paid, 0.0)
        wk.labour_h += c.labour_h
        wk.money += c.cost + hire
        visits[c.access_method] = (opener, paid + hire)
    wk.visits = visits
    return wk


def schedule(jobs: Sequence[Job], cap: Capacity, committed: Sequence[Committed] = ()) -> list[Slot]:
    """Each job's week, riskiest first, within the capacity (see the module docstring)."""
    weeks: dict[int, _Week] = {0: _preload(committed)} if committed else {}
    out: list[Slot] = []
    for rank, job in enumerate(risk_order(jobs)):
        w = max(job.earliest_week, 0)
        big = _alone_too_big(cap, job)
        while w < MAX_WEEKS:
            wk = weeks.setdefault(w, _Week(visits={}))
            visits = wk.visits if wk.visits is not None else {}
            visit = visits.get(job.access_method)
            shared = visit[0] if visit is not None else None
            paid = visit[1] if visit is not None else 0.0
            hire = max(job.hire - paid, 0.0)
            if big and wk.labour_h == 0.0 and wk.money == 0.0 and not wk.full:
                wk.full = True  # a week of its own
                out.append(Slot(job.area_id, w, rank, job.hire, None, over_capacity=True))
                break
            if not big and _fits(cap, wk, job.labour_h, job.cost + hire):
                wk.labour_h += job.labour_h
                wk.money += job.cost + hire
                visits[job.access_method] = (
                    job.area_id if shared is None else shared,
                    paid + hire,
                )
                wk.visits = visits
                out.append(Slot(job.area_id, w, rank, hire, shared))
                break
            w += 1
        else:  # no week within MAX_WEEKS: the last one, flagged
            out.append(Slot(job.area_id, MAX_WEEKS, rank, job.hire, None, over_capacity=True))
    return out


def week_loads(
    jobs: Sequence[Job], slots: Sequence[Slot], committed: Sequence[Committed] = ()
) -> dict[int, tuple[float, float]]:
    """Labour hours and money per scheduled week (hire as charged, committed orders in week 0)."""
    by_area = {j.area_id: j for j in jobs}
    out: dict[int, tuple[float, float]] = {}
    if committed:
        pre = _preload(committed)
        out[0] = (pre.labour_h, pre.money)
    for s in slots:
        j = by_area[s.area_id]
        h, m = out.get(s.week, (0.0, 0.0))
        out[s.week] = (h + j.labour_h, m + j.cost + s.hire_charged)
    return out
