"""Renewal function checks against closed forms, asymptotes and Monte Carlo."""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy import stats

from service.reliability.renewal import (
    RenewalCurve,
    renewal_from_cdf,
    renewal_on_grid,
    weibull_renewal,
)
from service.reliability.weibull import Weibull


def test_exponential_life_gives_linear_renewal_function() -> None:
    # Cox, *Renewal Theory*: exponential life with mean mu gives M(t) = t / mu exactly.
    mu = 8000.0
    curve = weibull_renewal(1.0, mu, 5 * mu)
    t = curve.t[1:]
    np.testing.assert_allclose(curve.m[1:], t / mu, rtol=1e-6)
    # Renewal density of a Poisson process is the constant 1/mu (Cox).
    np.testing.assert_allclose(curve.density, 1.0 / mu, rtol=1e-5)


@pytest.mark.parametrize("mu", [1.0, 1500.0, 20000.0])
def test_erlang2_closed_form(mu: float) -> None:
    # Tijms, *A First Course in Stochastic Models* §8.1: gamma life with shape 2 and mean mu,
    # M(t) = t/mu - 1/4 + exp(-4t/mu)/4.
    curve = renewal_from_cdf(lambda t: stats.gamma.cdf(t, 2.0, scale=mu / 2.0), 5 * mu, n=2000)
    t = curve.t[1:]
    exact = t / mu - 0.25 + np.exp(-4.0 * t / mu) / 4.0
    assert np.max(np.abs(curve.m[1:] / exact - 1.0)) <= 1e-4
    # Off-grid values through the interpolant (past the first grid cells, where M ~ t^2).
    x = np.linspace(0.02 * mu, 4.99 * mu, 997)
    exact_x = x / mu - 0.25 + np.exp(-4.0 * x / mu) / 4.0
    assert np.max(np.abs(curve.at(x) / exact_x - 1.0)) <= 1e-4
    # Its derivative, the renewal density (1 - exp(-4t/mu)) / mu (same source).
    dens = (1.0 - np.exp(-4.0 * x / mu)) / mu
    assert np.max(np.abs(curve.density_at(x) - dens)) <= 1e-3 / mu


@pytest.mark.parametrize("shape", [1.5, 3.5, 6.0])
def test_weibull_asymptote(shape: float) -> None:
    # Cox, *Renewal Theory*: M(t) -> t/mu + (CV^2 - 1)/2 for large t.
    w = Weibull(shape, 1000.0)
    mu, cv2 = w.mean(), w.variance() / w.mean() ** 2
    curve = weibull_renewal(shape, 1000.0, 12 * mu, n=2000)
    tail = curve.t > 10 * mu
    limit = curve.t[tail] / mu + (cv2 - 1.0) / 2.0
    np.testing.assert_allclose(curve.m[tail], limit, atol=1e-3)
    # and the density tends to 1/mu (Blackwell's renewal theorem, Cox); for shape 6 the
    # damped oscillation with period ~mu is still ~1e-3 of 1/mu at 10 mean lives.
    np.testing.assert_allclose(curve.density[tail], 1.0 / mu, rtol=3e-3)


def test_gamma_shape3_asymptote_through_generic_cdf() -> None:
    # Cox: gamma shape k has CV^2 = 1/k, so M(t) - t/mu -> (1/k - 1)/2 = -1/3 for k = 3.
    mu = 3.0
    curve = renewal_from_cdf(lambda t: stats.gamma.cdf(t, 3.0, scale=1.0), 15 * mu)
    assert curve.m[-1] - curve.t[-1] / mu == pytest.approx(-1.0 / 3.0, abs=1e-4)


def _simulated_counts(shape: float, scale: float, t_points: np.ndarray, n: int) -> np.ndarray:
    """Renewal counts N(t) for n independent positions (rows) at t_points (columns)."""
    rng = np.random.default_rng(20240611)
    mu = Weibull(shape, scale).mean()
    k = int(np.ceil(t_points.max() / mu * 2.5)) + 12  # enough lamps per position
    lives = scale * rng.weibull(shape, size=(n, k))
    arrivals = np.cumsum(lives, axis=1)
    assert np.all(arrivals[:, -1] > t_points.max())  # no position ran out of lamps
    return (arrivals[:, :, None] <= t_points[None, None, :]).sum(axis=1)


@pytest.mark.parametrize("shape", [1.5, 3.5, 6.0])
def test_monte_carlo_agreement(shape: float) -> None:
    # Independent check (our own Monte Carlo): simulate 10^5 renewal processes and compare the mean
    # count within 3 standard errors (plus 1e-4 for the solver itself).
    scale = 2000.0
    mu = Weibull(shape, scale).mean()
    t_points = np.array([0.5, 1.0, 1.7, 2.5, 3.0]) * mu
    counts = _simulated_counts(shape, scale, t_points, 100_000)
    mean, se = counts.mean(axis=0), counts.std(axis=0, ddof=1) / np.sqrt(counts.shape[0])
    curve = weibull_renewal(shape, scale, 3.2 * mu)
    m = curve.at(t_points)
    assert np.all(np.abs(m - mean) <= 3 * se + 1e-4), (m, mean, se)


@settings(max_examples=40, deadline=None)
@given(
    shape=st.floats(0.8, 8.0),
    scale=st.floats(10.0, 1e5),
    span=st.floats(0.5, 6.0),
)
def test_bounds_hold(shape: float, scale: float, span: float) -> None:
    # Barlow & Proschan: F(t) <= M(t) <= F(t)/(1 - F(t)) (M = sum of convolution powers,
    # each F^(k) <= F^k), and M is non-decreasing.
    w = Weibull(shape, scale)
    curve = weibull_renewal(shape, scale, span * w.mean(), n=400)
    f = w.cdf(curve.t)
    assert np.all(curve.m >= f - 1e-7)
    s = np.maximum(1.0 - f, 1e-300)
    assert np.all(curve.m <= f / s + 1e-6 * (1.0 + f / s))
    assert np.all(np.diff(curve.m) >= -1e-12)


def test_expected_in_window_is_difference_of_m() -> None:
    # Definition (Cox): expected renewals in (a, b] = M(b) - M(a); exponential: (b - a)/mu.
    mu = 5000.0
    curve = weibull_renewal(1.0, mu, 4 * mu)
    got = curve.expected_in_window(
        np.array([0.0, 1000.0, 7000.0]), np.array([500.0, 4000.0, 9000.0])
    )
    np.testing.assert_allclose(got, np.array([500.0, 3000.0, 2000.0]) / mu, rtol=1e-6)


def test_rejects_bad_cdf_values() -> None:
    with pytest.raises(ValueError):
        renewal_on_grid(np.array([0.1, 0.2, 0.3]), 1.0)  # F(0) must be 0
    with pytest.raises(ValueError):
        renewal_on_grid(np.array([0.0, 0.5, 0.2]), 1.0)  # decreasing
    with pytest.raises(ValueError):
        renewal_on_grid(np.array([0.0, 0.5, 0.7]), 0.0)


def test_curve_is_frozen() -> None:
    curve = weibull_renewal(2.0, 100.0, 300.0, n=100)
    assert isinstance(curve, RenewalCurve)
    with pytest.raises(AttributeError):
        curve.m = curve.m  # type: ignore[misc]
