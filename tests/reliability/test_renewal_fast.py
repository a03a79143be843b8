"""The FFT solution of the renewal scheme against the O(n²) recursion and closed forms."""

from __future__ import annotations

import numpy as np
import pytest
from scipy import stats

from service.reliability.renewal import (
    midpoint_scheme,
    midpoint_scheme_direct,
    renewal_from_cdf,
    renewal_on_grid,
    weibull_renewal,
)
from service.reliability.weibull import Weibull
from service.reliability.weibull import cdf as weibull_cdf

GRID_SIZES = [2, 3, 7, 64, 255, 256, 257, 1000, 2001, 3000]


def _agree(fast: np.ndarray, oracle: np.ndarray) -> None:
    """Both solve the same linear equations: equal to rounding, absolute and relative."""
    assert fast.shape == oracle.shape
    np.testing.assert_allclose(fast, oracle, rtol=0, atol=1e-12 * max(1.0, oracle.max()))
    # Relative agreement wherever M is not lost in the rounding of the larger terms.
    big = oracle > 1e-6
    np.testing.assert_allclose(fast[big], oracle[big], rtol=1e-10)


@pytest.mark.parametrize("shape", [0.5, 1.0, 1.5, 2.0, 3.5, 5.0, 8.0])
@pytest.mark.parametrize("n", GRID_SIZES)
def test_fft_division_matches_direct_recursion(shape: float, n: int) -> None:
    # Oracle: the same discrete scheme (Xie 1989) solved point by point in O(n²).
    w = Weibull(shape, 1000.0)
    t = np.linspace(0.0, 5.0 * w.mean(), n + 1)
    f = weibull_cdf(t, shape, 1000.0)
    _agree(midpoint_scheme(f), midpoint_scheme_direct(f))


@pytest.mark.parametrize("shape", [0.5, 2.0, 8.0])
@pytest.mark.parametrize("n", [4, 998, 1000, 2000, 2002])
def test_renewal_on_grid_with_richardson_matches_oracle(shape: float, n: int) -> None:
    # Oracle: the Richardson-extrapolated O(n²) solution (direct=True).
    t = np.linspace(0.0, 4000.0, n + 1)
    f = weibull_cdf(t, shape, 1000.0)
    step = float(t[1])
    _agree(renewal_on_grid(f, step), renewal_on_grid(f, step, direct=True))


def test_short_horizon_keeps_tiny_values_relative() -> None:
    # A horizon of a tenth of the scale: M stays below 1e-7 with shape 8, so absolute
    # agreement alone would say nothing; the directly summed first block keeps it relative.
    t = np.linspace(0.0, 100.0, 2001)
    f = weibull_cdf(t, 8.0, 1000.0)
    fast, oracle = midpoint_scheme(f), midpoint_scheme_direct(f)
    pos = oracle > 0
    np.testing.assert_allclose(fast[pos], oracle[pos], rtol=1e-9)


@pytest.mark.parametrize("n", [1000, 2000, 2999])
def test_erlang2_closed_form_fast_and_direct(n: int) -> None:
    # Tijms, *A First Course in Stochastic Models* §8.1: gamma life with shape 2 and mean mu
    # has M(t) = t/mu - 1/4 + exp(-4t/mu)/4. Both solvers reach it to the scheme's accuracy
    # (1e-6 relative with Richardson on these grids) and agree with each other to rounding.
    mu = 1500.0
    t = np.linspace(0.0, 5.0 * mu, n + 1)
    f = stats.gamma.cdf(t, 2.0, scale=mu / 2.0)
    fast = renewal_on_grid(f, float(t[1]))
    oracle = renewal_on_grid(f, float(t[1]), direct=True)
    exact = t[1:] / mu - 0.25 + np.exp(-4.0 * t[1:] / mu) / 4.0
    tol = 1e-6 if n % 2 == 0 else 1e-4  # an odd n has no Richardson step (O(h²) only)
    assert np.max(np.abs(fast[1:] / exact - 1.0)) <= tol
    _agree(fast, oracle)


def test_fine_grid_is_more_accurate_than_default() -> None:
    # Erlang-2 closed form (Tijms §8.1) again: 20,000 steps beat 2,000 (O(h⁴) after Richardson).
    mu = 1.0
    errors = []
    for n in (2000, 20000):
        curve = renewal_from_cdf(lambda x: stats.gamma.cdf(x, 2.0, scale=mu / 2.0), 5 * mu, n=n)
        x = curve.t[curve.t > 0.5]
        exact = x / mu - 0.25 + np.exp(-4.0 * x / mu) / 4.0
        errors.append(np.max(np.abs(curve.m[curve.t > 0.5] - exact)))
    assert errors[1] < errors[0] / 10.0


def test_weibull_renewal_uses_the_fast_solver() -> None:
    # The public curve equals the oracle's M on the same grid (Xie 1989 scheme both ways).
    w = Weibull.from_rated_life(24000.0, 5.0)
    curve = weibull_renewal(w.shape, w.scale, 3.0 * w.mean(), n=2000)
    oracle = renewal_on_grid(weibull_cdf(curve.t, w.shape, w.scale), curve.step_h, direct=True)
    _agree(curve.m, oracle)


def test_scalar_interpolant_equals_the_array_one() -> None:
    # The same cubic Hermite formula in floats: equal to the array version to rounding,
    # inside the grid, at grid points, at 0, below 0 and past the horizon.
    curve = weibull_renewal(3.0, 1000.0, 3000.0, n=2000)
    xs = [-5.0, 0.0, 1e-3, 0.75, 1.5, 999.9, 1000.0, 2999.0, 3000.0, 3500.0, 1e5]
    xs += np.random.default_rng(5).uniform(0.0, 3200.0, 200).tolist()
    for x in xs:
        assert curve.at_scalar(x) == pytest.approx(float(curve.at(x)), rel=1e-13, abs=1e-300)
