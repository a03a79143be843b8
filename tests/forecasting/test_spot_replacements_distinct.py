"""Expected spot replacements computed once per distinct (age, window) pair.

Oracles: the per-position midpoint Stieltjes sum (the same formula, one position at a time,
no grouping) and, for shape 1, the Poisson process: a memoryless lamp's expected
replacements in w hours are w / eta whatever its age [Cox, *Renewal Theory*].
"""

from __future__ import annotations

import numpy as np

from service.forecasting.spot_replacements import GRID, NODES, expected_replacements
from service.reliability.renewal import weibull_renewal


def _one_by_one(
    shape: np.ndarray, k: np.ndarray, scale: np.ndarray, age: np.ndarray, win: np.ndarray
) -> np.ndarray:
    out = np.zeros(age.size)
    frac = np.linspace(0.0, 1.0, NODES + 1)
    mid = 0.5 * (frac[1:] + frac[:-1])
    for t in np.unique(k).tolist():
        idx = np.nonzero((k == t) & (win > 0))[0]
        if not idx.size:
            continue
        beta = float(shape[t])
        curve = weibull_renewal(beta, 1.0, float((win[idx] / scale[idx]).max()) * 1.0001, GRID)
        for i in idx.tolist():
            a, w = age[i] / scale[i], win[i] / scale[i]
            f_a = -np.expm1(-(np.power(a + w * frac, beta) - np.power(a, beta)))
            out[i] = f_a[-1] + np.sum(np.diff(f_a) * curve.at(w * (1.0 - mid)))
    return out


def test_grouped_pairs_give_the_per_position_sums() -> None:
    rng = np.random.default_rng(11)
    n = 600
    shape = np.array([1.3, 3.5, 6.0])
    k = rng.integers(0, 3, n)
    scale = rng.choice([900.0, 15_000.0], n)
    # Many positions share their pair (lamps put in together), some are unique.
    age = np.where(rng.random(n) < 0.5, rng.choice([0.0, 400.0, 8000.0], n), rng.uniform(0, 9e3, n))
    win = rng.choice([0.0, 300.0, 1092.0], n)
    got = expected_replacements(shape, k, scale, age, win)
    want = _one_by_one(shape, k, scale, age, win)
    np.testing.assert_allclose(got, want, rtol=1e-12, atol=1e-15)
    assert np.all(got[win == 0] == 0.0)
    # Equal inputs, equal outputs (a pair's value is copied back to every member).
    key = np.column_stack((k, scale, age, win))
    _, inv = np.unique(key, axis=0, return_inverse=True)
    inv = np.ravel(inv)
    for g in np.unique(inv)[:50].tolist():
        assert np.unique(got[inv == g]).size == 1


def test_memoryless_lamps_follow_the_poisson_count() -> None:
    age = np.array([0.0, 0.0, 500.0, 500.0, 20_000.0])
    win = np.array([1000.0, 1000.0, 1000.0, 250.0, 1000.0])
    scale = np.full(5, 10_000.0)
    got = expected_replacements(np.array([1.0]), np.zeros(5, dtype=np.int64), scale, age, win)
    np.testing.assert_allclose(got, win / scale, rtol=1e-3)
