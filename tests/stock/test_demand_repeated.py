"""The exact mixture over distinct position rows against the per-position recursion.

Reference: reliability.mixture.pmf_truncated / mixture.mixture on every position's own row
(the textbook Bernoulli-by-Bernoulli recursion P_j(k) = P_{j-1}(k)(1 - p_j) +
P_{j-1}(k-1) p_j), an independent algorithm from stock.demand.pmf_repeated's
characteristic-function DFT [Fernandez & Williams 2010] of rows raised to their counts.
"""

from __future__ import annotations

import numpy as np

from service.reliability import mixture as mx
from service.stock import demand


def _rows(seed: int, u: int, c: int) -> tuple[np.ndarray, np.ndarray]:
    rng = np.random.default_rng(seed)
    p = rng.uniform(0.0, 0.3, (3, u, c)) ** 2  # small and a few larger chances
    p[:, 0] = 0.7  # a row past one half (the log's branch does not matter for w integer)
    weight = rng.integers(1, 40, u).astype(np.float64)
    return p, weight


def test_pmf_of_repeated_rows_equals_the_recursion_on_every_position() -> None:
    p, weight = _rows(1, 25, 4)
    full = np.repeat(p, weight.astype(int), axis=1)
    kmax = mx.support_max(mx.Moments.of(full), full.shape[1])  # the mixture's own support
    got = demand.pmf_repeated(p, weight, kmax)
    for f in range(p.shape[0]):
        want = mx.pmf_truncated(full[f], kmax)  # (C, kmax + 1)
        assert np.max(np.abs(got[f] - want)) < 1e-12
        assert abs(float(got[f].sum(axis=1).min()) - 1.0) < 1e-9  # the tail is negligible


def test_mixed_equals_the_mixture_of_the_expanded_positions() -> None:
    r = mx.rule()
    rng = np.random.default_rng(2)
    u, c = 30, 2
    base = rng.uniform(0.001, 0.08, (u, c))
    # Larger scales at higher nodes: fewer failures (as node_demand's passes give).
    p = np.clip(base[None] * np.exp(-0.25 * r.z)[:, None, None], 0.0, 1.0)
    weight = rng.integers(3, 30, u).astype(np.float64)
    full = np.repeat(p, weight.astype(int), axis=1)
    n = int(weight.sum())
    m = mx.Moments.of(full)
    nd = demand.NodeDemand(n, m, m, p, p, weight)
    got, want = demand.mixed(m, nd, p), mx.mixture(m, n, r, full)
    assert (got.method, want.method) == ("exact", "exact")
    assert got.pmf is not None and want.pmf is not None
    assert np.max(np.abs(got.pmf - want.pmf)) < 1e-12
    for level in (0.5, 0.9, 0.95, 0.99):
        assert np.array_equal(got.quantile(level), want.quantile(level))
    np.testing.assert_allclose(got.mean, want.mean, rtol=1e-12)
