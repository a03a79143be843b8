"""The catch-up schedule: capacity kept, riskiest first, one visit and hire per access method.

The loads are recounted here from the jobs and the weeks alone (one hire per access method
and week), independently of the schedule's own hire bookkeeping.
"""

from __future__ import annotations

import math
from collections import defaultdict

import numpy as np

from service.planning.catch_up import Capacity, Committed, Job, schedule, week_loads


def _recount(jobs: list[Job], weeks: dict[int, int]) -> dict[int, tuple[float, float]]:
    """Labour and money per week, the hire counted once per (week, access method)."""
    labour: dict[int, float] = defaultdict(float)
    money: dict[int, float] = defaultdict(float)
    hired: dict[tuple[int, str], float] = {}
    for j in jobs:
        w = weeks[j.area_id]
        labour[w] += j.labour_h
        money[w] += j.cost
        hired[(w, j.access_method)] = max(hired.get((w, j.access_method), 0.0), j.hire)
    for (w, _), h in hired.items():
        money[w] += h
    return {w: (labour[w], money[w]) for w in labour}


def _jobs(rng: np.random.Generator, n: int) -> list[Job]:
    return [
        Job(
            area_id=i + 1,
            access_method=str(rng.choice(["ladder", "lift", "scaffold"])),
            labour_h=float(rng.uniform(2, 30)),
            cost=float(rng.uniform(100, 2000)),
            hire=float(rng.choice([0.0, 300.0])),
            earliest_week=int(rng.integers(0, 3)),
            risk_weeks=float(rng.uniform(-10, 20)),
        )
        for i in range(n)
    ]


def test_capacity_is_never_exceeded() -> None:
    rng = np.random.default_rng(7)
    for _ in range(30):
        jobs = _jobs(rng, int(rng.integers(1, 40)))
        cap = Capacity(labour_h=40.0, budget=float(rng.choice([2500.0, 5000.0])))
        slots = schedule(jobs, cap)
        assert sorted(s.area_id for s in slots) == sorted(j.area_id for j in jobs)
        assert not any(s.over_capacity for s in slots)  # every job here fits a week alone
        weeks = {s.area_id: s.week for s in slots}
        for labour, money in _recount(jobs, weeks).values():
            assert labour <= 40.0 + 1e-9 and money <= cap.budget + 1e-6  # type: ignore[operator]
        for j in jobs:  # never before its due week
            assert weeks[j.area_id] >= j.earliest_week


def test_riskiest_area_goes_first() -> None:
    rng = np.random.default_rng(3)
    jobs = [
        Job(i + 1, "ladder", 30.0, 500.0, 0.0, 0, risk_weeks=float(r))
        for i, r in enumerate(rng.permutation(10) - 3)
    ]
    slots = {s.area_id: s for s in schedule(jobs, Capacity(labour_h=40.0))}
    riskiest = min(jobs, key=lambda j: j.risk_weeks)
    assert slots[riskiest.area_id].week == 0 and slots[riskiest.area_id].order == 0
    # One 30 h job a week: the weeks follow the risk order exactly.
    by_risk = sorted(jobs, key=lambda j: j.risk_weeks)
    assert [slots[j.area_id].week for j in by_risk] == list(range(10))


def test_areas_of_one_access_method_share_a_visit_and_one_hire() -> None:
    # Three parking levels on the lift and a stair on ladders, all due now.
    jobs = [Job(a, "lift", 6.0, 400.0, 350.0, 0, risk_weeks=1.0) for a in (1, 2, 3)]
    jobs.append(Job(4, "ladder", 4.0, 200.0, 0.0, 0, risk_weeks=5.0))
    slots = {s.area_id: s for s in schedule(jobs, Capacity(labour_h=40.0, budget=2500.0))}
    assert {s.week for s in slots.values()} == {0}
    assert [slots[a].hire_charged for a in (1, 2, 3)] == [350.0, 0.0, 0.0]
    assert slots[2].shares_visit_with == 1 and slots[3].shares_visit_with == 1
    # 1,600 a week: the shared lift visit takes 350 + 3 x 400 = 1,550 (three hires would be
    # 2,250 and spill into a second week), so the ladder job (200) waits a week.
    tight = {s.area_id: s for s in schedule(jobs, Capacity(labour_h=40.0, budget=1600.0))}
    assert [tight[a].week for a in (1, 2, 3)] == [0, 0, 0]
    assert tight[4].week == 1
    recount = _recount(jobs, {a: s.week for a, s in tight.items()})
    assert recount[0] == (18.0, 1550.0) and all(m <= 1600.0 for _, m in recount.values())


def test_a_job_bigger_than_a_week_gets_a_week_of_its_own_flagged() -> None:
    jobs = [Job(1, "lift", 60.0, 100.0, 0.0, 0, risk_weeks=0.0)]
    jobs.append(Job(2, "ladder", 5.0, 100.0, 0.0, 0, risk_weeks=1.0))
    slots = {s.area_id: s for s in schedule(jobs, Capacity(labour_h=40.0))}
    assert slots[1].over_capacity and slots[1].week == 0
    assert slots[2].week == 1 and not slots[2].over_capacity


def test_no_capacity_puts_everything_in_its_due_week() -> None:
    jobs = _jobs(np.random.default_rng(1), 25)
    slots = schedule(jobs, Capacity())
    assert all(
        s.week == j.earliest_week
        for s, j in zip(sorted(slots, key=lambda s: s.area_id), jobs, strict=True)
    )
    assert not Capacity().limited and math.isinf(Job(1, "x", 1, 1, 0, 0).risk_weeks)


def _recount_with(
    jobs: list[Job], weeks: dict[int, int], committed: list[Committed]
) -> dict[int, tuple[float, float]]:
    """_recount with the committed orders as extra jobs of week 0 (one hire per method)."""
    extra = [Job(c.area_id, c.access_method, c.labour_h, c.cost, c.hire, 0) for c in committed]
    return _recount(jobs + extra, {**weeks, **{c.area_id: 0 for c in committed}})


def test_open_orders_of_earlier_weeks_count_against_this_weeks_capacity() -> None:
    rng = np.random.default_rng(11)
    for _ in range(30):
        jobs = _jobs(rng, int(rng.integers(1, 30)))
        committed = [
            Committed(
                1000 + i,
                str(rng.choice(["ladder", "lift"])),
                float(rng.uniform(2, 15)),
                float(rng.uniform(100, 800)),
                float(rng.choice([0.0, 300.0])),
            )
            for i in range(int(rng.integers(1, 4)))
        ]
        cap = Capacity(labour_h=40.0, budget=5000.0)
        slots = schedule(jobs, cap, committed)
        assert not any(s.over_capacity for s in slots)
        weeks = {s.area_id: s.week for s in slots}
        recount = _recount_with(jobs, weeks, committed)
        for labour, money in recount.values():
            assert labour <= 40.0 + 1e-9 and money <= 5000.0 + 1e-6
        # The same schedule counted by the module agrees with the independent recount.
        loads = week_loads(jobs, slots, committed)
        for w, (labour, money) in recount.items():
            assert math.isclose(loads[w][0], labour) and math.isclose(loads[w][1], money)


def test_committed_hours_push_work_out_and_the_riskiest_still_goes_first() -> None:
    # 40 h a week; an earlier week's open order holds 25 h: one 12 h job fits this week.
    jobs = [Job(a, "ladder", 12.0, 100.0, 0.0, 0, risk_weeks=r) for a, r in ((1, 5.0), (2, -2.0))]
    jobs.append(Job(3, "ladder", 12.0, 100.0, 0.0, 0, risk_weeks=1.0))
    held = [Committed(9, "ladder", 25.0, 500.0, 0.0)]
    free = {s.area_id: s for s in schedule(jobs, Capacity(labour_h=40.0))}
    assert [free[a].week for a in (1, 2, 3)] == [0, 0, 0]  # 36 h: all this week without it
    slots = {s.area_id: s for s in schedule(jobs, Capacity(labour_h=40.0), held)}
    assert slots[2].order == 0 and slots[2].week == 0  # the riskiest (past its limit) first
    assert slots[3].week == 1 and slots[1].week == 1  # 25 + 12 = 37: no room for a second
    # A committed lift visit this week: a lift job joining it pays no second hire.
    lift = [Job(5, "lift", 2.0, 50.0, 300.0, 0, risk_weeks=0.0)]
    joined = schedule(lift, Capacity(labour_h=40.0), [Committed(9, "lift", 5.0, 80.0, 300.0)])
    assert joined[0].week == 0 and joined[0].hire_charged == 0.0
    assert joined[0].shares_visit_with == 9


def test_a_week_full_of_committed_work_takes_nothing_new() -> None:
    held = [Committed(9, "ladder", 45.0, 0.0, 0.0)]  # already over the 40 h
    jobs = [Job(1, "ladder", 5.0, 10.0, 0.0, 0, risk_weeks=-1.0)]
    big = [Job(2, "lift", 50.0, 10.0, 0.0, 0, risk_weeks=-2.0)]
    assert schedule(jobs, Capacity(labour_h=40.0), held)[0].week == 1
    alone = schedule(big, Capacity(labour_h=40.0), held)[0]  # too big: an empty week of its own
    assert alone.week == 1 and alone.over_capacity
