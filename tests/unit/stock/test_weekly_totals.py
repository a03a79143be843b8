"""Weekly spot curves summed per label before the convolution, against the per-position pass.

References: stock.demand.weekly_cumulative (per position; itself checked against
forecasting.spot_replacements in tests/stock/test_demand_one_pass.py), whose weighted sums
the totals must equal (the delayed-renewal sum is linear in F_a: same grid, same M); and the
exponential life's N_a(w) = w / eta at any age [Cox, *Renewal Theory*: a Poisson process].
"""

from __future__ import annotations

import numpy as np
import pytest

from service.stock import demand

WEEKS = 26


def _fleet(n: int, seed: int) -> tuple[np.ndarray, ...]:
    """Mixed lamp rows, scales, ages, burn rates, weights and labels."""
    rng = np.random.default_rng(seed)
    k = rng.integers(0, 3, n).astype(np.int64)
    shape = np.array([5.0, 3.0, 1.5])
    scale = np.array([20_000.0, 1_100.0, 9_000.0])[k] * rng.choice([0.9, 1.0, 1.1], n)
    age = rng.uniform(0, 1.2, n) * scale
    rate = rng.choice([0.0, 40.0, 84.0, 168.0], n)  # 0: an area with no schedule
    weight = rng.integers(1, 5, n).astype(float)
    label = rng.integers(0, 4, n).astype(np.int64)
    return shape, k, scale, age, rate, weight, label


@pytest.mark.parametrize("chunk", [demand.CHUNK, 37])  # one block, and rows split across blocks
def test_totals_equal_the_weighted_per_position_sums(
    chunk: int, monkeypatch: pytest.MonkeyPatch
) -> None:
    shape, k, scale, age, rate, weight, label = _fleet(900, seed=11)
    per = demand.weekly_cumulative(shape, k, scale, age, rate, WEEKS)
    want = np.zeros((4, WEEKS + 1))
    np.add.at(want, label, per * weight[:, None])
    monkeypatch.setattr(demand, "CHUNK", chunk)
    got = demand.weekly_cumulative_totals(
        shape, k, scale, age, rate, WEEKS, weight=weight, label=label, labels=4
    )
    assert want[:, -1].min() > 1.0  # every label expects burnouts
    # Equal sums of the same terms; 1e-7: the bound the module gives its M table's linear
    # read, so the check holds whichever accurate table both functions read.
    np.testing.assert_allclose(got, want, rtol=1e-7, atol=1e-12)


def test_exponential_totals_are_w_over_eta() -> None:
    # Cox, Renewal Theory: with exponential lives the count in (a, a + w] is Poisson(w / eta).
    n = 40
    age = np.linspace(0.0, 30_000.0, n)
    scale = np.full(n, 8_000.0)
    rate = np.full(n, 100.0)
    label = (np.arange(n) % 2).astype(np.int64)
    got = demand.weekly_cumulative_totals(
        np.array([1.0]),
        np.zeros(n, np.int64),
        scale,
        age,
        rate,
        WEEKS,
        weight=np.ones(n),
        label=label,
        labels=3,
    )
    per = 100.0 * np.arange(WEEKS + 1) / 8_000.0  # one position's w / eta
    np.testing.assert_allclose(got[0], 20 * per, rtol=2e-4, atol=1e-9)
    np.testing.assert_allclose(got[1], 20 * per, rtol=2e-4, atol=1e-9)
    assert not got[2].any()  # a label with no positions stays zero


def test_no_positions_or_no_weeks_give_zeros() -> None:
    empty = np.zeros(0)
    got = demand.weekly_cumulative_totals(
        np.array([3.0]),
        np.zeros(0, np.int64),
        empty,
        empty,
        empty,
        WEEKS,
        weight=empty,
        label=np.zeros(0, np.int64),
        labels=2,
    )
    assert got.shape == (2, WEEKS + 1) and not got.any()
