"""Burnout ranges: coverage against an independent Monte Carlo fleet, delta method vs bootstrap."""

from __future__ import annotations

import numpy as np
import pytest
from scipy import stats

from service.reliability.poisson_binomial import pmf_dft
from service.reliability.uncertainty import (
    count_range,
    parameter_variance,
    sd_from_bounds,
    window_gradients,
)

BETA, ETA, W = 3.0, 10_000.0, 800.0  # shape, scale (h), horizon (h)
SD_SHAPE, SD_SCALE = 0.05, 0.08  # standard deviations of ln beta and ln eta


def _fleet(n: int = 3000) -> np.ndarray:
    return np.random.default_rng(7).uniform(0.0, 1.2 * ETA, n)  # burning ages, hours


def _simulated_counts(ages: np.ndarray, draws: int, seed: int) -> np.ndarray:
    """Monte Carlo: parameters drawn, then each lamp's remaining life drawn given its age."""
    rng = np.random.default_rng(seed)
    out = np.empty(draws)
    for s in range(0, draws, 500):
        m = min(500, draws - s)
        beta = np.exp(np.log(BETA) + SD_SHAPE * rng.standard_normal(m))[:, None]
        eta = np.exp(np.log(ETA) + SD_SCALE * rng.standard_normal(m))[:, None]
        # Conditional Weibull life given survival to a: T = eta (H(a) + E)^(1/beta), E ~ Exp(1)
        # (inverse transform of the conditional survival function).
        h0 = np.power(ages[None, :] / eta, beta)
        life = eta * np.power(h0 + rng.exponential(size=(m, ages.size)), 1.0 / beta)
        out[s : s + m] = (life < ages[None, :] + W).sum(axis=1)
    return out


def test_range_covers_ninety_percent_of_an_independent_monte_carlo_fleet() -> None:
    ages = _fleet()
    p, d_shape, d_scale = window_gradients(ages, W, BETA, ETA)
    var_p = parameter_variance(
        np.zeros(ages.size, dtype=np.int64), d_shape, d_scale, SD_SHAPE, SD_SCALE
    )
    rng = count_range(p, var_p, 0.90)
    counts = _simulated_counts(ages, 20_000, seed=2026)
    covered = float(np.mean((counts >= rng.low) & (counts <= rng.high)))
    # Independent Monte Carlo of the fleet, 20,000 draws (standard error of coverage 0.002).
    assert 0.88 <= covered <= 0.92, covered
    assert rng.var_params > rng.var_events  # shared parameters dominate a large fleet


def test_without_parameter_uncertainty_the_range_is_the_exact_poisson_binomial() -> None:
    ages = _fleet(300)
    p, _, _ = window_gradients(ages, W, BETA, ETA)
    rng = count_range(p, 0.0, 0.90)
    # Independent: a direct Bernoulli simulation of the same p (no parameter spread).
    sims = (np.random.default_rng(3).random((40_000, p.size)) < p).sum(axis=1)
    assert np.quantile(sims, 0.05) == pytest.approx(rng.low, abs=1)
    assert np.quantile(sims, 0.95) == pytest.approx(rng.high, abs=1)
    assert pmf_dft(p).sum() == pytest.approx(1.0)
    assert "exact" in rng.method


def test_delta_method_matches_a_parametric_bootstrap_of_the_mean_count() -> None:
    ages = _fleet()
    _, d_shape, d_scale = window_gradients(ages, W, BETA, ETA)
    group = np.zeros(ages.size, dtype=np.int64)
    delta_sd = np.sqrt(parameter_variance(group, d_shape, d_scale, SD_SHAPE, SD_SCALE))
    rng = np.random.default_rng(11)
    means = [
        window_gradients(ages, W, BETA * np.exp(SD_SHAPE * zb), ETA * np.exp(SD_SCALE * ze))[
            0
        ].sum()
        for zb, ze in rng.standard_normal((3000, 2))
    ]
    # Parametric bootstrap of sum p over draws of (ln beta, ln eta): first-order agreement.
    assert float(np.std(means)) == pytest.approx(delta_sd, rel=0.06)


def test_gradients_match_finite_differences() -> None:
    ages = np.array([0.0, 2_000.0, 9_000.0, 15_000.0])
    _, d_shape, d_scale = window_gradients(ages, W, BETA, ETA)
    e = 1e-6
    p = lambda b, s: window_gradients(ages, W, b, s)[0]  # noqa: E731
    fd_shape = (p(BETA * np.exp(e), ETA) - p(BETA * np.exp(-e), ETA)) / (2 * e)
    fd_scale = (p(BETA, ETA * np.exp(e)) - p(BETA, ETA * np.exp(-e))) / (2 * e)
    assert d_shape == pytest.approx(fd_shape, rel=1e-5, abs=1e-12)
    assert d_scale == pytest.approx(fd_scale, rel=1e-5, abs=1e-12)


def test_types_add_their_variances_and_bounds_give_the_log_sd() -> None:
    g = np.array([0, 0, 1])
    d_b, d_e = np.array([0.1, 0.2, 0.5]), np.array([-0.3, -0.1, -0.4])
    var = parameter_variance(g, d_b, d_e, np.array([0.1, 0.0]), np.array([0.2, 0.3]))
    # Type 0: (0.3 x 0.1)^2 + (0.4 x 0.2)^2; type 1: (0.4 x 0.3)^2 (the gradients sum per type).
    assert var == pytest.approx(0.03**2 + 0.08**2 + 0.12**2)
    z = stats.norm.ppf(0.95)
    assert sd_from_bounds(np.exp(-z * 0.2), np.exp(z * 0.2), 0.90) == pytest.approx(0.2)


def test_no_positions_carry_no_parameter_variance() -> None:
    # A site with no lamp positions yet: the sum of no terms is 0 (and must not raise).
    empty = np.array([], dtype=np.int64)
    assert parameter_variance(empty, empty, empty, 0.1, 0.2) == 0.0


def test_parameter_groups_without_positions_add_nothing() -> None:
    # Three fitted lamp types, positions of the first only: the other two groups' gradient
    # sums are 0, so the variance is the first group's g' Sigma g alone (delta method).
    g = np.zeros(4, dtype=np.int64)
    d_b, d_e = np.full(4, 0.1), np.full(4, -0.2)
    var = parameter_variance(g, d_b, d_e, np.array([0.1, 0.5, 0.5]), np.array([0.2, 0.5, 0.5]))
    assert var == pytest.approx((0.4 * 0.1) ** 2 + (0.8 * 0.2) ** 2)
