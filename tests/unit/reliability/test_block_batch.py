"""Bulk block replacement and the vectorised bounded Brent search, against scalar references.

References: scipy.optimize.minimize_scalar(method="bounded") for the search (same points,
same values); plan_block_replacement on each problem's own scaled renewal curve for the bulk
plans (every field equal).
"""

from __future__ import annotations

import numpy as np
import pytest
from scipy.optimize import minimize_scalar

from service.planning.group_plan import _unit_renewal
from service.reliability.block_batch import ScaledProblems, plan_block_replacement_scaled
from service.reliability.bounded_search import bounded_minimum_many
from service.reliability.renewal import RenewalCurve
from service.reliability.replacement import plan_block_replacement
from service.reliability.weibull import Weibull


def test_bounded_search_matches_scipy() -> None:
    rng = np.random.default_rng(7)
    n = 120
    centre = rng.uniform(-3, 3, n)
    lo, hi = centre - rng.uniform(0.1, 5, n), centre + rng.uniform(0.1, 5, n)
    xatol = 1e-6 * np.abs(hi) + 1e-9

    def f(x: np.ndarray, rows: np.ndarray) -> np.ndarray:
        out: np.ndarray = (x - centre[rows]) ** 2 * (1 + 0.3 * np.sin(5 * x)) + 0.1 * np.cos(3 * x)
        return out

    x, fx = bounded_minimum_many(f, lo, hi, xatol)
    for i in range(n):
        ref = minimize_scalar(
            lambda v, i=i: float(f(np.array([v]), np.array([i]))[0]),
            bounds=(lo[i], hi[i]),
            method="bounded",
            options={"xatol": xatol[i]},
        )
        assert (x[i], fx[i]) == (ref.x, ref.fun)


def test_bounded_search_refuses_bad_bounds() -> None:
    with pytest.raises(ValueError, match="bounds"):
        bounded_minimum_many(lambda x, r: x, np.array([1.0]), np.array([0.0]), np.array([1e-6]))


def _opt(v: float) -> float | None:
    return None if np.isnan(v) else float(v)


@pytest.mark.parametrize("shape", [1.3, 2.5, 4.0])
def test_bulk_plans_equal_the_scalar_plans(shape: float) -> None:
    rng = np.random.default_rng(int(shape * 10))
    unit = _unit_renewal(shape, 3 * Weibull(shape, 1.0).mean(), 2000)
    n = 150
    scale = rng.uniform(500, 30_000, n)
    c_group = rng.uniform(2, 40, n)
    c_spot = c_group * rng.uniform(0.5, 8, n)  # some with c_group >= c_spot
    mean = np.array([Weibull(shape, s).mean() for s in scale])
    floor = np.where(rng.random(n) < 0.3, rng.uniform(0.2, 2.5, n) * mean, np.nan)
    ceiling = np.where(rng.random(n) < 0.3, rng.uniform(0.02, 0.5, n), np.nan)
    rupture = np.where(rng.random(n) < 0.2, rng.uniform(0.2, 2.5, n) * mean, np.nan)
    got = plan_block_replacement_scaled(
        ScaledProblems(
            unit=unit,
            scale_h=scale,
            c_group=c_group,
            c_spot=c_spot,
            mean_life_h=mean,
            light_floor_h=floor,
            burnout_ceiling=ceiling,
            rupture_cap_h=rupture,
        )
    )
    bindings = set()
    for i, plan in enumerate(got):
        curve = RenewalCurve(
            t=unit.t * scale[i], m=unit.m, density=unit.density / scale[i], cdf=unit.cdf
        )
        ref = plan_block_replacement(
            curve,
            float(c_group[i]),
            float(c_spot[i]),
            mean_life_h=float(mean[i]),
            light_floor_h=_opt(floor[i]),
            burnout_ceiling=_opt(ceiling[i]),
            rupture_cap_h=_opt(rupture[i]),
        )
        for name in ("interval_h", "cost_rate", "binding", "notes", "unconstrained_optimum_h"):
            assert getattr(plan, name) == getattr(ref, name), (i, name)
        assert plan.expected_spot_per_position == ref.expected_spot_per_position
        assert plan.safety_premium_rate == ref.safety_premium_rate
        assert np.array_equal(plan.grid_cost, ref.grid_cost)
        bindings.add(plan.binding)
    assert {"spot_only", "cost_optimum"} <= bindings and len(bindings) >= 3
