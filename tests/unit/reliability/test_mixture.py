"""The burnout range as the count's mixture over the uncertain scale, against outside references.

References: an independent Monte Carlo of the fleet that draws the Weibull scale from its
lognormal per replicate, then each lamp's remaining life given its age (inverse transform of
the conditional survival function); scipy.integrate.quad of a lognormal expectation for the
Gauss-Hermite quadrature; scipy.stats.poisson_binom-free checks use the DFT pmf
(reliability/poisson_binomial.pmf_dft, itself checked against scipy in tests/stock).
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import integrate, stats

from service.reliability import mixture as mx
from service.reliability.poisson_binomial import pmf_dft
from service.reliability.uncertainty import (
    CountRange,
    GroupCurve,
    count_mixture,
    count_range,
    parameter_variance,
    window_gradients,
)

BETA, ETA, W, N = 3.0, 10_000.0, 800.0, 3000
REPS = 20_000  # binomial standard error of a 90 % coverage: sqrt(0.9 x 0.1 / 20,000) = 0.0021


def _ages(n: int = N) -> np.ndarray:
    return np.random.default_rng(7).uniform(0.0, 1.2 * ETA, n)


def _monte_carlo(ages: np.ndarray, sigma: float, seed: int) -> np.ndarray:
    """Counts of burnouts within W: the scale drawn from its lognormal once per replicate."""
    rng = np.random.default_rng(seed)
    out = np.empty(REPS)
    for s in range(0, REPS, 1000):
        eta = ETA * np.exp(sigma * rng.standard_normal(1000))[:, None]
        h0 = (ages[None, :] / eta) ** BETA
        life = eta * (h0 + rng.exponential(size=(1000, ages.size))) ** (1 / BETA)
        out[s : s + 1000] = (life < ages[None, :] + W).sum(axis=1)
    return out


def _group(ages: np.ndarray, sigma: float) -> GroupCurve:
    n = ages.size
    return GroupCurve(ages, np.full(n, W), np.full(n, BETA), np.full(n, ETA), 0.0, sigma)


def _normal(ages: np.ndarray, sigma: float) -> CountRange:
    """The replaced method: Poisson-binomial variance + delta method, normal interval."""
    p, d_b, d_e = window_gradients(ages, W, BETA, ETA)
    var = parameter_variance(np.zeros(ages.size, dtype=np.int64), d_b, d_e, 0.0, sigma)
    return count_range(p, var, 0.90)


def _check(rng: CountRange, counts: np.ndarray) -> None:
    """A central 90 % range: 88-92 % covered, and about 5 % beyond each end (4-6 %)."""
    covered = float(np.mean((counts >= rng.low) & (counts <= rng.high)))
    below = float(np.mean(counts < rng.low))
    above = float(np.mean(counts > rng.high))
    assert 0.88 <= covered <= 0.92, (covered, below, above)
    assert 0.04 <= below <= 0.06 and 0.04 <= above <= 0.06, (covered, below, above)


@pytest.mark.parametrize("sigma", [0.08, 0.246])
def test_mixture_range_covers_ninety_percent_of_an_independent_monte_carlo(sigma: float) -> None:
    ages = _ages()
    counts = _monte_carlo(ages, sigma, seed=2026)
    rng = count_mixture([_group(ages, sigma)], 0.90)
    _check(rng, counts)
    assert rng.mean == pytest.approx(counts.mean(), rel=0.01)  # 20,000 draws: se ~0.2 %
    assert "mixture" in rng.method


@pytest.mark.parametrize("sigma", [0.08, 0.246])
def test_the_normal_approximation_fails_the_same_check(sigma: float) -> None:
    # The same check, applied to the delta-method normal interval it replaces: it must fail
    # (the check discriminates). At 0.246 it covers 88.5 % but its low end is 0 (no lower
    # tail) and 11 % lie above its high end; at 0.08 its ends sit ~19 lamps low.
    ages = _ages()
    counts = _monte_carlo(ages, sigma, seed=2026)
    with pytest.raises(AssertionError):
        _check(_normal(ages, sigma), counts)


def test_small_fleet_exact_mixture_against_monte_carlo() -> None:
    ages = _ages(150)
    counts = _monte_carlo(ages, 0.246, seed=11)
    rng = count_mixture([_group(ages, 0.246)], 0.90)
    lo, hi = (np.quantile(counts, q, method="inverted_cdf") for q in (0.05, 0.95))
    assert abs(rng.low - lo) <= 1 and abs(rng.high - hi) <= 1, (rng, lo, hi)


def test_two_independent_types_convolve() -> None:
    ages = _ages(400)
    a, b = ages[:200], ages[200:]
    both = count_mixture([_group(a, 0.2), _group(b, 0.1)], 0.90)
    # Independent Monte Carlo: each type's scale drawn on its own.
    ca = _monte_carlo(a, 0.2, seed=1)
    cb = _monte_carlo(b, 0.1, seed=2)
    total = ca + cb
    lo, hi = (np.quantile(total, q, method="inverted_cdf") for q in (0.05, 0.95))
    assert abs(both.low - lo) <= 1 and abs(both.high - hi) <= 1, (both, lo, hi)


def test_without_spread_the_range_is_the_exact_poisson_binomial() -> None:
    ages = _ages(300)
    p = window_gradients(ages, W, BETA, ETA)[0]
    rng = count_mixture([_group(ages, 0.0)], 0.90)
    cdf = np.cumsum(pmf_dft(p))  # DFT pmf (checked against scipy's poisson_binom elsewhere)
    assert rng.low == int(np.searchsorted(cdf, 0.05 - 1e-12))
    assert rng.high == int(np.searchsorted(cdf, 0.95 - 1e-12))


def test_gauss_hermite_against_quad_of_a_lognormal_expectation() -> None:
    # E[sum_j p_j(eta e^{sigma Z})] by the rule's nodes against scipy.integrate.quad over the
    # lognormal density of the scale.
    ages, sigma = _ages(200), 0.246
    z, w = mx.gauss_hermite()
    gh = sum(
        wk * window_gradients(ages, W, BETA, ETA * math.exp(sigma * zk))[0].sum()
        for zk, wk in zip(z, w, strict=True)
    )
    dens = stats.lognorm(s=sigma, scale=ETA)
    ref, _ = integrate.quad(
        lambda e: window_gradients(ages, W, BETA, e)[0].sum() * dens.pdf(e), 0, ETA * 10, limit=200
    )
    assert gh == pytest.approx(ref, rel=1e-6)
    # and a closed form: E[e^{aZ}] = e^{a^2/2} (lognormal mean), exact for the rule to 1e-6
    assert float(w @ np.exp(0.7 * z)) == pytest.approx(math.exp(0.245), rel=1e-6)


def test_refined_normal_against_the_exact_pmf() -> None:
    # The large-fleet refinement (Volkova's RNA) against the exact DFT pmf of 400 chances.
    p = np.random.default_rng(4).uniform(0.05, 0.6, 400)
    m = mx.Moments.of(p[:, None])
    ks = np.arange(401, dtype=float)[None, :]
    rna = mx.rna_cdf(ks, mx.Moments(m.mean[:, None], m.var[:, None], m.third[:, None]))[0]
    exact = np.cumsum(pmf_dft(p))
    assert np.abs(rna - exact).max() < 2e-3


def test_moment_sums_vanishing_at_some_nodes_carry_without_overshoot() -> None:
    # A type with no chance of failing at the largest scales (sums 0 there): the interpolant
    # of the log sums must stay within the nodes' range (it overflowed to infinity once).
    r = mx.rule()
    mean = np.array([50.0, 20.0, 5.0, 1.0, 1e-5, 0.0, 0.0, 0.0, 0.0])[:, None]
    fine = mx.Moments(mean, mean * 0.9, mean * 0.8).to_fine(r)
    assert np.all(np.isfinite(fine.mean)) and fine.mean.max() <= 50.0 + 1e-9
    mix = mx.mixture(mx.Moments(mean, mean * 0.9, mean * 0.8), 60, r)
    q = int(mix.quantile(0.95)[0])
    # reference: the same mixture summed directly at the nodes with scipy's Poisson CDF
    # bounds it: between the quantiles of the nodes' smallest and largest means
    assert 0 <= q <= int(stats.poisson(50.0).ppf(0.999))
