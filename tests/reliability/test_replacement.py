"""Group (block) replacement planning checks."""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy import stats

from service.reliability.megalumen import cost_per_megalumen_hour
from service.reliability.renewal import weibull_renewal
from service.reliability.replacement import block_cost_rate, plan_block_replacement
from service.reliability.weibull import Weibull

# Demo costs per position (invented): a group relamp visit vs a spot call-out.
C_GROUP = 10.0
C_SPOT = 40.0


def _lives(w: Weibull, n: int, k: int, seed: int) -> np.ndarray:
    rng = np.random.default_rng(seed)
    return w.scale * rng.weibull(w.shape, size=(n, k))


def _cycle_costs(arrivals: np.ndarray, T: float) -> np.ndarray:
    """Cost per hour of one cycle of length T per simulated position: group + spot calls."""
    spot_calls = (arrivals <= T).sum(axis=1)
    return (C_GROUP + C_SPOT * spot_calls) / T


def test_block_plan_matches_monte_carlo_cost() -> None:
    # Independent check (our own Monte Carlo): simulate 10^5 positions over a cycle of length T with
    # spot replacements and estimate the cost per hour; Barlow & Proschan's cost rate at the
    # chosen T must agree within 3 standard errors.
    w = Weibull.from_rated_life(12000.0, 3.5)
    plan = plan_block_replacement(w, C_GROUP, C_SPOT)
    assert plan.binding == "cost_optimum" and plan.interval_h is not None
    T = plan.interval_h
    arrivals = np.cumsum(_lives(w, 100_000, 8, seed=7), axis=1)
    assert np.all(arrivals[:, -1] > 1.3 * T)
    at_opt = _cycle_costs(arrivals, T)
    se = at_opt.std(ddof=1) / np.sqrt(at_opt.size)
    assert abs(plan.cost_rate - at_opt.mean()) <= 3 * se
    # The chosen T must not be beaten by nearby intervals in the same simulation (common random
    # numbers make the paired difference precise).
    for factor in (0.7, 0.85, 1.15, 1.3):
        diff = at_opt - _cycle_costs(arrivals, factor * T)
        assert diff.mean() <= 3 * diff.std(ddof=1) / np.sqrt(diff.size), factor
    # and group relamping really does beat spot only here
    assert plan.saving_rate > 0
    assert plan.spot_only_rate == pytest.approx(C_SPOT / w.mean())


def test_grid_cost_is_block_cost_rate() -> None:
    # Barlow & Proschan: C(T) = (c_group + c_spot M(T)) / T on the reported grid.
    w = Weibull(4.0, 10000.0)
    plan = plan_block_replacement(w, C_GROUP, C_SPOT)
    curve = weibull_renewal(4.0, 10000.0, 3 * w.mean())
    np.testing.assert_allclose(plan.grid_cost, block_cost_rate(plan.grid_t, curve, C_GROUP, C_SPOT))
    assert plan.cost_rate <= plan.grid_cost.min() + 1e-15
    assert plan.expected_spot_per_position == pytest.approx(float(curve.at(plan.interval_h)))


def test_exponential_life_is_spot_only() -> None:
    # Cox: exponential life has M(T) = T/mu, so C(T) = c_group/T + c_spot/mu falls for ever:
    # no finite optimum, spot replacement only (Barlow & Proschan, block replacement).
    w = Weibull(1.0, 9000.0)
    plan = plan_block_replacement(w, C_GROUP, C_SPOT)
    assert plan.interval_h is None
    assert plan.binding == "spot_only"
    assert plan.cost_rate == pytest.approx(C_SPOT / 9000.0)
    assert plan.saving_rate == 0.0
    assert plan.unconstrained_optimum_h is None
    np.testing.assert_allclose(plan.grid_cost, C_GROUP / plan.grid_t + C_SPOT / 9000.0, rtol=1e-6)


def test_group_cost_not_below_spot_cost_is_spot_only() -> None:
    # Barlow & Proschan (via Wald: M(T) + 1 >= T/mu): with c_group >= c_spot, C(T) >= c_spot/mu.
    w = Weibull(5.0, 10000.0)
    plan = plan_block_replacement(w, 45.0, 40.0)
    assert plan.binding == "spot_only" and plan.interval_h is None
    assert np.all(plan.grid_cost >= 40.0 / w.mean() * (1 - 1e-6))


def test_light_floor_binds_below_cost_optimum() -> None:
    # Common practice: the light floor caps the interval; C(T) falls towards the optimum, so the
    # capped plan sits at the cap.
    w = Weibull.from_rated_life(10000.0, 4.0)
    free = plan_block_replacement(w, C_GROUP, C_SPOT)
    assert free.interval_h is not None
    floor = 0.6 * free.interval_h
    plan = plan_block_replacement(w, C_GROUP, C_SPOT, light_floor_h=floor)
    assert plan.binding == "light_floor"
    assert plan.interval_h == pytest.approx(floor)
    assert plan.unconstrained_optimum_h == pytest.approx(free.interval_h)
    assert plan.cost_rate > free.cost_rate
    # A floor above the optimum does not bind.
    loose = plan_block_replacement(w, C_GROUP, C_SPOT, light_floor_h=1.5 * free.interval_h)
    assert loose.binding == "cost_optimum"
    assert loose.interval_h == pytest.approx(free.interval_h)


def test_burnout_ceiling_uses_weibull_percentile() -> None:
    # Abernethy: B-life t_p = eta (-ln(1-p))^(1/beta); cross-checked with scipy.stats.weibull_min.
    w = Weibull.from_rated_life(10000.0, 4.0)
    plan = plan_block_replacement(w, C_GROUP, C_SPOT, burnout_ceiling=0.05)
    assert plan.binding == "burnout_ceiling"
    assert plan.interval_h == pytest.approx(stats.weibull_min.ppf(0.05, 4.0, scale=w.scale))
    assert w.cdf(plan.interval_h) == pytest.approx(0.05)


def test_smallest_cap_binds() -> None:
    # Common practice: several caps, the tightest one sets the interval.
    w = Weibull.from_rated_life(10000.0, 4.0)
    plan = plan_block_replacement(
        w, C_GROUP, C_SPOT, light_floor_h=5500.0, burnout_ceiling=0.10, rupture_cap_h=5000.0
    )
    assert plan.binding == "rupture_cap"
    assert plan.interval_h == pytest.approx(5000.0)


def test_rupture_cap_forces_group_relamp_even_when_spot_is_cheaper() -> None:
    # Common practice: lamps that can rupture are group relamped at or before the cap. With
    # exponential life (Cox: M(T) = T/mu) spot only would be cheaper, yet the plan must group
    # relamp at the cap, at cost (c_group + c_spot T/mu)/T.
    mu, cap = 9000.0, 6300.0
    plan = plan_block_replacement(Weibull(1.0, mu), C_GROUP, C_SPOT, rupture_cap_h=cap)
    assert plan.binding == "rupture_cap"
    assert plan.interval_h == pytest.approx(cap)
    assert plan.cost_rate == pytest.approx(C_GROUP / cap + C_SPOT / mu, rel=1e-6)
    assert plan.safety_premium_rate == pytest.approx(C_GROUP / cap, rel=1e-5)
    assert plan.saving_rate == 0.0


def test_plan_rejects_bad_inputs() -> None:
    w = Weibull(3.0, 1000.0)
    with pytest.raises(ValueError):
        plan_block_replacement(w, 0.0, 10.0)
    with pytest.raises(ValueError):
        plan_block_replacement(w, 1.0, 10.0, burnout_ceiling=1.5)


@settings(max_examples=40, deadline=None)
@given(
    shape=st.floats(1.0, 8.0),
    scale=st.floats(100.0, 1e5),
    c_group=st.floats(0.1, 100.0),
    c_spot=st.floats(0.1, 100.0),
    frac=st.floats(0.01, 3.0),
)
def test_cost_rates_finite_and_positive(
    shape: float, scale: float, c_group: float, c_spot: float, frac: float
) -> None:
    # Barlow & Proschan: the cost rate is positive finite for positive costs and T > 0, and
    # the block rate is at least c_group/T + c_spot F(T)/T since M(T) >= F(T).
    w = Weibull(shape, scale)
    T = frac * w.mean()
    curve = weibull_renewal(shape, scale, 3 * w.mean(), n=300)
    c = float(block_cost_rate(T, curve, c_group, c_spot))
    assert np.isfinite(c) and c > 0
    # (slack on the F term: in the first grid cells M ~ t^beta is interpolated to ~1% or 1e-8)
    assert c * T >= c_group + c_spot * (float(w.cdf(T)) * (1 - 1e-2) - 1e-8)


def test_megalumen_identity_with_constant_light() -> None:
    # Renewal identity (Cox): S(t) + integral m(s) S(t-s) ds = 1, so with no lumen depreciation
    # the mean light is 100% and the cost per Mlm.h is the hand formula.
    w = Weibull(3.5, 10000.0)
    curve = weibull_renewal(3.5, 10000.0, 3 * w.mean())
    T = np.array([2000.0, 6000.0, 9000.0])
    res = cost_per_megalumen_hour(
        T,
        curve,
        C_GROUP,
        C_SPOT,
        lamp_watts=100.0,
        tariff_per_kwh=0.2,
        initial_lumens=9000.0,
        lumen_fraction=lambda u: np.ones_like(u),
        survival=w.sf,
    )
    np.testing.assert_allclose(res.mean_light_fraction, 1.0, atol=1e-4)
    expected = (C_GROUP + C_SPOT * curve.at(T) + 0.2 * 0.1 * T) / (9000.0 * T / 1e6)
    np.testing.assert_allclose(res.cost_per_mlmh, expected, rtol=1e-4)


def test_megalumen_mean_light_matches_monte_carlo() -> None:
    # Independent Monte Carlo: each simulated position integrates exp(-age/tau) exactly lamp by
    # lamp over a cycle; the mean over 10^5 positions must match within 3 standard errors.
    w = Weibull(3.0, 8000.0)
    tau = 30000.0  # demo lumen decay constant, hours
    curve = weibull_renewal(3.0, 8000.0, 3 * w.mean())
    T = 6000.0
    res = cost_per_megalumen_hour(
        np.array([T]),
        curve,
        C_GROUP,
        C_SPOT,
        lamp_watts=50.0,
        tariff_per_kwh=0.1,
        initial_lumens=5000.0,
        lumen_fraction=lambda u: np.exp(-u / tau),
        survival=w.sf,
    )
    rng = np.random.default_rng(11)
    lives = w.scale * rng.weibull(w.shape, size=(100_000, 8))
    starts = np.concatenate([np.zeros((lives.shape[0], 1)), np.cumsum(lives, axis=1)], axis=1)
    assert np.all(starts[:, -1] > T)
    seg = np.clip(np.minimum(starts[:, 1:], T) - starts[:, :-1], 0.0, None)
    light = (tau * (1.0 - np.exp(-seg / tau))).sum(axis=1) / T
    se = light.std(ddof=1) / np.sqrt(light.size)
    assert abs(res.mean_light_fraction[0] - light.mean()) <= 3 * se + 1e-5


def _mlm(w: Weibull, tau: float, **kw: float) -> tuple[object, object]:
    curve = weibull_renewal(w.shape, w.scale, 3 * w.mean())
    res = cost_per_megalumen_hour(
        np.array([0.5 * w.mean()]),
        curve,
        C_GROUP,
        C_SPOT,
        lamp_watts=60.0,
        tariff_per_kwh=0.25,
        initial_lumens=6000.0,
        lumen_fraction=lambda u: np.exp(-u / tau),
        survival=w.sf,
        **kw,
    )
    return curve, res


def test_megalumen_spot_only_limit_matches_quadrature() -> None:
    # Stationary (equilibrium) age density S(u)/mu under spot replacement (renewal-reward):
    # mean light = int S L / int S, by scipy.integrate.quad to 3 mean lives (S is ~0 there).
    from scipy.integrate import quad

    w = Weibull(3.5, 9000.0)
    tau = 20000.0
    _, res = _mlm(w, tau)
    h = 3 * w.mean()
    num = quad(lambda u: float(w.sf(u)) * np.exp(-u / tau), 0.0, h)[0]
    den = quad(lambda u: float(w.sf(u)), 0.0, h)[0]
    assert res.spot_only_mean_light_fraction == pytest.approx(num / den, rel=1e-5)
    expected = (C_SPOT / den + 0.25 * 0.06) / (6000.0 * (num / den) / 1e6)
    assert res.spot_only_cost_per_mlmh == pytest.approx(expected, rel=1e-5)


def test_megalumen_best_interval_is_the_dense_minimum_below_a_cap() -> None:
    # Brute force: evaluate the same objective on a dense grid of intervals and take the
    # smallest; the refined optimum must match it, and under a cap below it, sit at the cap.
    w = Weibull(4.0, 10000.0)
    curve, free = _mlm(w, 15000.0)
    dense = np.linspace(200.0, 2.5 * w.mean(), 20_000)
    full = cost_per_megalumen_hour(
        dense,
        curve,
        C_GROUP,
        C_SPOT,
        lamp_watts=60.0,
        tariff_per_kwh=0.25,
        initial_lumens=6000.0,
        lumen_fraction=lambda u: np.exp(-u / 15000.0),
        survival=w.sf,
    )
    k = int(np.argmin(full.cost_per_mlmh))
    assert free.best_interval_h is not None and not free.at_limit
    assert free.best_interval_h == pytest.approx(dense[k], abs=2 * (dense[1] - dense[0]))
    assert free.best_cost_per_mlmh <= full.cost_per_mlmh[k] * (1 + 1e-9)
    assert free.best_cost_per_mlmh < free.spot_only_cost_per_mlmh
    cap = 0.5 * free.best_interval_h
    _, capped = _mlm(w, 15000.0, max_interval_h=cap)
    assert capped.at_limit and capped.limited_interval_h == pytest.approx(cap)
    below = full.cost_per_mlmh[dense <= cap]
    assert capped.limited_cost_per_mlmh <= below.min() * (1 + 1e-9)


def test_megalumen_exponential_life_without_light_loss_is_spot_only() -> None:
    # Constant hazard and no lumen loss: group relamping buys nothing (Barlow & Proschan), so
    # the best answer is spot only and the spot-only figure is the hand formula.
    w = Weibull(1.0, 5000.0)
    curve = weibull_renewal(1.0, 5000.0, 3 * w.mean())
    res = cost_per_megalumen_hour(
        [1000.0],
        curve,
        C_GROUP,
        C_SPOT,
        lamp_watts=40.0,
        tariff_per_kwh=0.2,
        initial_lumens=3000.0,
        lumen_fraction=lambda u: np.ones_like(u),
        survival=w.sf,
    )
    assert res.best_interval_h is None
    s_int = 5000.0 * (1 - np.exp(-3.0))  # int_0^3mu exp(-t/mu) dt, truncated as the core does
    assert res.spot_only_cost_per_mlmh == pytest.approx(
        (C_SPOT / s_int + 0.2 * 0.04) / (3000.0 / 1e6), rel=1e-6
    )
