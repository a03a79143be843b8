"""The bulk planner (one vectorised interval search per renewal curve) against the old one.

Oracle: tests/planning/legacy_plans.py, the area planner as it was (one scalar plan_group per
distinct input). Every field of every plan must be equal, on the demo scenario and on a
randomized portfolio with and without what-if overrides.
"""

from __future__ import annotations

from datetime import UTC, datetime, timedelta
from pathlib import Path

import numpy as np
import pytest
from sqlalchemy import select
from sqlalchemy.orm import Session

from service.planning.group_plan import PlanCache
from service.planning.plan_bodies import area_plan_read, area_plan_reads
from service.planning.portfolio import portfolio_plans
from service.planning.positions import load_positions
from service.planning.schemas import PlanOverrides
from service.planning.service import AreaPlan, area_plan, plan_areas, site_plans
from service.register.models import Area, Site
from service.seed.loader import load_demo
from service.workorders.repository import last_group_relamps
from tests import factories as fx
from tests.planning.legacy_plans import legacy_plan_areas

AT = datetime(2026, 11, 2, 9, 0, tzinfo=UTC)


def _same(new: list[AreaPlan], old: list[AreaPlan], age_rel: float = 0.0) -> int:
    """Assert the two planners agree exactly; the number of lamp-type groups compared.

    age_rel: relative tolerance on group ages (a portfolio-wide load counts burn hours from
    an earlier origin, which moves an age in its last bits).
    """
    assert [p.area.id for p in new] == [p.area.id for p in old]
    n = 0
    for a, b in zip(new, old, strict=True):
        assert (a.positions, a.weekly_burn_hours, a.group_age_basis, a.due_on) == (
            b.positions,
            b.weekly_burn_hours,
            b.group_age_basis,
            b.due_on,
        )
        assert len(a.groups) == len(b.groups)
        for g, h in zip(a.groups, b.groups, strict=True):
            assert (g.lamp_type_id, g.positions, g.voltage_v, g.voltage_basis) == (
                h.lamp_type_id,
                h.positions,
                h.voltage_v,
                h.voltage_basis,
            )
            assert (g.hours_per_start, g.costs, g.cond) == (h.hours_per_start, h.costs, h.cond)
            assert g.group_age_h == pytest.approx(h.group_age_h, rel=age_rel, abs=0.0)
            assert (g.due_on, g.overdue) == (h.due_on, h.overdue)
            p, q = g.group.plan, h.group.plan
            for name in (
                "interval_h",
                "cost_rate",
                "spot_only_rate",
                "saving_rate",
                "binding",
                "unconstrained_optimum_h",
                "expected_spot_per_position",
                "notes",
                "safety_premium_rate",
                "horizon_h",
            ):
                assert getattr(p, name) == getattr(q, name), (a.area.id, g.lamp_type_id, name)
            assert np.array_equal(p.grid_t, q.grid_t) and np.array_equal(p.grid_cost, q.grid_cost)
            for name in ("life", "life_factor", "light_floor_h", "rupture_cap_h", "warnings"):
                assert getattr(g.group, name) == getattr(h.group, name), name
            n += 1
    return n


def _compare(db: Session, at: datetime, over: PlanOverrides | None = None) -> int:
    groups = 0
    for site in db.scalars(select(Site).order_by(Site.id)).all():
        areas = list(db.scalars(select(Area).where(Area.site_id == site.id).order_by(Area.id)))
        pos = load_positions(db, site_id=site.id, at=at)
        last = last_group_relamps(db, [a.id for a in areas])
        new = plan_areas(db, site, areas, pos, at, over, PlanCache(), last_relamps=last)
        old = legacy_plan_areas(db, site, areas, pos, at, over, PlanCache(), last_relamps=last)
        groups += _same(new, old)
    return groups


def test_demo_plans_are_unchanged(db: Session, tmp_path: Path) -> None:
    load_demo(db, key_file=tmp_path / "key.txt")
    db.commit()
    assert _compare(db, datetime.now(UTC)) > 5


TECHS = [  # (technology, rated life h, shape, extra columns)
    ("incandescent", 1000.0, 3.5, {}),
    ("linear_fluorescent", 24_000.0, 4.0, {"contains_mercury": True}),
    ("metal_halide", 15_000.0, 3.0, {"contains_mercury": True, "rupture_risk": True}),
    ("high_pressure_sodium", 24_000.0, 5.0, {"contains_mercury": True}),
    ("led", 50_000.0, 2.0, {}),
]


def _random_portfolio(db: Session, seed: int) -> None:
    rng = np.random.default_rng(seed)
    types = [
        fx.lamp_type(
            db,
            f"R{i}",
            technology=t,
            rated_life_h=life,
            weibull_shape=shape,
            life_exponent=None,
            unit_price=float(rng.uniform(2, 40)),
            **extra,
        )
        for i, (t, life, shape, extra) in enumerate(TECHS)
    ]
    for s in range(2):
        site = fx.site(db, f"Random {seed}-{s}", disposal_fee_per_mercury_lamp=0.5)
        for k in range(8):
            area = fx.area(
                db,
                site,
                f"A{k}",
                hours_per_day=float(rng.choice([8.0, 12.0, 24.0])),
                equipment_hire_per_visit=float(rng.choice([0.0, 120.0])),
                light_floor=0.8 if k % 3 == 0 else None,
                burnout_ceiling=0.15 if k % 4 == 1 else None,
            )
            for j in range(int(rng.integers(1, 4))):
                lt = types[int(rng.integers(len(types)))]
                weeks = float(rng.uniform(1, 300))
                fx.fixtures(
                    db,
                    area,
                    lt,
                    int(rng.integers(1, 6)),
                    lamps=int(rng.integers(1, 3)),
                    installed_at=AT - timedelta(weeks=weeks),
                    tag=f"T{j}-",
                    measured_voltage_v=float(np.round(rng.uniform(215, 245), 1)),
                )
    db.commit()


@pytest.mark.parametrize("seed", [1, 2])
def test_random_portfolio_plans_are_unchanged(db: Session, seed: int) -> None:
    _random_portfolio(db, seed)
    assert _compare(db, AT) > 10


def test_what_if_overrides_are_unchanged(db: Session) -> None:
    _random_portfolio(db, 3)
    over = PlanOverrides(voltage_v=238.0, light_floor=0.85, equipment_hire_per_visit=300.0)
    assert _compare(db, AT, over) > 10


def _site_by_site(db: Session, at: datetime) -> list[AreaPlan]:
    sites = db.scalars(select(Site).order_by(Site.name)).all()
    return [p for s in sites for p in site_plans(db, s, at, last_relamps=last_group_relamps)]


def test_portfolio_plans_equal_site_by_site_plans(db: Session, tmp_path: Path) -> None:
    load_demo(db, key_file=tmp_path / "key.txt")
    _random_portfolio(db, 4)
    now = datetime.now(UTC)
    sites = db.scalars(select(Site).order_by(Site.name)).all()
    got = portfolio_plans(db, sites, now, last_relamps=last_group_relamps)
    assert _same(got.plans, _site_by_site(db, now), age_rel=1e-12) > 20
    # The chart's positions are the plans' positions: every active one, once.
    active = load_positions(db, at=now)
    assert np.array_equal(np.sort(got.ages.position_id), np.sort(active.position_id))


def _alike_portfolio(db: Session) -> None:
    """Many areas alike in some inputs and not others: the fast path shares their searches."""
    types = [
        fx.lamp_type(
            db,
            f"S{i}",
            technology=t,
            rated_life_h=life,
            weibull_shape=shape,
            life_exponent=None,
            unit_price=6.0 + i,
            **extra,
        )
        for i, (t, life, shape, extra) in enumerate(TECHS)
    ]
    site = fx.site(db, "Alike Works", disposal_fee_per_mercury_lamp=0.5)
    volts = [226.0, 230.0, 230.0, 236.5]  # repeats: alike groups; filament life moves with V
    for k in range(16):
        area = fx.area(
            db,
            site,
            f"B{k}",
            hours_per_day=[12.0, 24.0][k % 2],
            equipment_hire_per_visit=[0.0, 150.0][(k // 2) % 2],
            light_floor=0.8 if k % 3 == 0 else None,
            burnout_ceiling=0.15 if k % 5 == 1 else None,
            relamp_includes_cleaning=k % 4 == 3,
        )
        for j, lt in enumerate((types[k % 5], types[(k + 2) % 5])):
            fx.fixtures(
                db,
                area,
                lt,
                3,
                lamps=2,
                installed_at=AT - timedelta(weeks=[20.0, 90.0, 250.0][(k + j) % 3]),
                tag=f"T{j}-",
                measured_voltage_v=volts[(k + j) % 4],
            )
    db.commit()


def test_alike_areas_plan_as_each_area_alone(db: Session) -> None:
    # Oracle: the legacy planner (one scalar plan_group per distinct input) and each area's
    # own plan (area_plan: its positions loaded and searched alone).
    _alike_portfolio(db)
    assert _compare(db, AT) >= 32
    site = db.scalars(select(Site).where(Site.name == "Alike Works")).one()
    together = site_plans(db, site, AT, last_relamps=last_group_relamps)
    alone = [
        area_plan(db, p.area.id, PlanOverrides(at=AT), last_relamps=last_group_relamps)
        for p in together
    ]
    assert _same(together, alone, age_rel=1e-12) == 32


def test_site_bodies_share_views_as_each_group_alone(db: Session) -> None:
    # Oracle: area_plan_read without shared views (each group's energy view, maintained
    # light and fit bounds computed on its own, the scalar plan_group per bound).
    _alike_portfolio(db)
    _random_portfolio(db, 5)
    for site in db.scalars(select(Site).order_by(Site.id)).all():
        plans = site_plans(db, site, AT, last_relamps=last_group_relamps)
        shared = [b.model_dump_json() for b in area_plan_reads(plans)]
        again = site_plans(db, site, AT, last_relamps=last_group_relamps)
        alone = [area_plan_read(p).model_dump_json() for p in again]
        assert shared == alone, site.name
