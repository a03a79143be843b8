"""The pure demand and reorder arithmetic against outside references."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import stats

from service.stock import demand, outlook, reorder


@pytest.mark.parametrize("n", [1, 7, 60])  # scipy's poisson_binom takes at most 63 here
def test_dft_pmf_matches_scipy_poisson_binom(n: int) -> None:
    rng = np.random.default_rng(n)
    p = rng.uniform(0.0, 0.3, n)
    ref = stats.poisson_binom(p)  # scipy.stats.poisson_binom (scipy >= 1.15)
    k = np.arange(n + 1)
    assert np.allclose(demand.pmf_dft(p), ref.pmf(k), atol=1e-10)
    for level in (0.5, 0.9, 0.95, 0.99):
        assert demand.quantile_exact(p, level) == int(ref.ppf(level))


def test_dft_pmf_matches_direct_convolution_at_the_exact_limit() -> None:
    p = np.random.default_rng(9).uniform(0.0, 0.2, demand.EXACT_MAX)
    ref = np.ones(1)
    for x in p:  # the pmf of a sum of Bernoullis by repeated convolution (independent)
        ref = np.convolve(ref, [1 - x, x])
    assert np.allclose(demand.pmf_dft(p), ref, atol=1e-10)


def test_normal_quantile_against_monte_carlo_and_scipy() -> None:
    rng = np.random.default_rng(3)
    p = rng.uniform(0.0, 0.05, 5000)
    got, method = demand.quantile(p, 0.95)
    assert method == "normal"
    exact = np.ones(1)
    for x in p:  # the exact pmf by repeated convolution (independent of the DFT)
        exact = np.convolve(exact, [1 - x, x])
    assert abs(got - int(np.searchsorted(np.cumsum(exact), 0.95))) <= 1
    # An independent Monte Carlo of the Bernoulli sum (20,000 draws).
    sims = (rng.random((4000, p.size)) < p).sum(axis=1)
    sims = np.concatenate([sims, (rng.random((16000, p.size)) < p).sum(axis=1)])
    assert abs(got - float(np.quantile(sims, 0.95))) <= 1


def test_normal_quantile_textbook_reorder_point() -> None:
    # Heizer & Render, Operations Management, safety stock with a normal lead-time demand
    # (recalled from memory): mean 350, sd 10, 95 % service, Z = 1.65 -> ROP 366.5 kits.
    # Ours uses z = 1.6449 and counts whole units with the half-unit correction.
    got = demand.quantile_normal(350.0, 100.0, 0.95)
    assert abs(got - 366.5) <= 1.0
    assert got == math.ceil(350 + stats.norm.ppf(0.95) * 10 - 0.5)  # the closed form


def test_eoq_textbook_example_and_closed_form() -> None:
    # Heizer & Render, Operations Management, EOQ example (recalled from memory):
    # D = 1,000 units a year, S = $10 an order, H = $0.50 a unit a year -> Q* = 200.
    assert reorder.eoq(1000, 10, 0.5) == pytest.approx(200.0)
    # Harris closed form: total cost D S / Q + H Q / 2 is least at Q*.
    q = reorder.eoq(5200, 35, 1.2)
    assert q is not None

    def cost(x: float) -> float:
        return 5200 * 35 / x + 1.2 * x / 2

    assert cost(q) < cost(q * 0.98) and cost(q) < cost(q * 1.02)
    assert reorder.eoq(1000, 0, 0.5) is None  # nothing to balance: no EOQ


def test_decide_orders_whole_packs_only_at_or_below_the_reorder_point() -> None:
    common = {
        "pack_size": 25,
        "policy": "eoq",
        "annual_demand": 1000.0,
        "order_cost": 10.0,
        "holding_cost_per_year": 0.5,
        "lead_time_mean": 30.0,
        "cover_need": None,
    }
    assert reorder.decide(available=41, reorder_point=40, **common).order_quantity == 0
    d = reorder.decide(available=40, reorder_point=40, **common)
    assert d.order_quantity == 200  # Q* = 200 is 8 packs of 25
    d = reorder.decide(available=-300, reorder_point=40, **common)  # far below: lift above s
    assert d.order_quantity == 350 and d.order_quantity % 25 == 0
    cover = {**common, "policy": "cover_next_group", "cover_need": 130.0}
    d = reorder.decide(available=10, reorder_point=40, **cover)
    # 130 through the next group + safety (40 - 30) - 10 available = 130 -> 6 packs = 150.
    assert d.order_quantity == 150


def test_cumulative_with_group_restarts_from_a_new_lamp() -> None:
    before = np.array([[0.0, 0.2, 0.5, 0.9], [0.0, 0.1, 0.2, 0.3]])
    after = np.array([[0.0, 0.01, 0.03, 0.06], [0.0, 0.01, 0.03, 0.06]])
    cum = demand.cumulative_with_group(before, after, np.array([1, 3]))
    # Position 0 relamped at week boundary 1: 0.2 then + M(1), + M(2). Position 1: never.
    assert np.allclose(cum[0], [0.0, 0.2, 0.21, 0.23])
    assert np.allclose(cum[1], before[1])


def test_week_demand_adds_group_breakage_and_dark_lamps() -> None:
    p = np.full((10, 3), 0.1)
    wd = demand.week_demand(p, np.array([0, 10, 0]), 0.95, 0.02, dark_now=2)
    assert np.allclose(wd.spot_mean, [3.0, 1.0, 1.0])
    assert np.allclose(wd.breakage, 0.02 * (wd.spot_mean + np.array([0, 10, 0])))
    # Binomial(10, 0.1) 95 % quantile is 3 (scipy.stats.binom), +2 dark lamps in week 1.
    assert int(stats.binom(10, 0.1).ppf(0.95)) == 3
    assert wd.spot_quantile.tolist() == [5, 3, 3]


def test_outlook_levels() -> None:
    lv = outlook.project(20, np.array([2.0, 2.0, 2.0]), np.array([1.0, 1.0, 1.0]), 0.95, 10, 2)
    assert lv.level_mean.tolist() == [18.0, 26.0, 24.0]
    # Cumulative demand 2, 4, 6 with variance 1, 2, 3: normal 95 % quantiles, corrected.
    q = [
        math.ceil(m + stats.norm.ppf(0.95) * math.sqrt(v) - 0.5)
        for m, v in [(2, 1), (4, 2), (6, 3)]
    ]
    assert lv.level_at_service_level.tolist() == [20 - q[0], 30 - q[1], 30 - q[2]]
