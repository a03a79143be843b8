"""Checks of service.reliability.weibull against scipy.stats.weibull_min and closed forms."""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy import stats

from service.reliability import weibull as wb

SHAPES = [0.7, 1.0, 1.5, 3.5, 6.0]
SCALES = [800.0, 12_000.0, 60_000.0]
HOURS = np.array([0.0, 1.0, 250.0, 1_000.0, 9_000.0, 30_000.0, 90_000.0])


@pytest.mark.parametrize("beta", SHAPES)
@pytest.mark.parametrize("eta", SCALES)
def test_functions_match_scipy_weibull_min(beta: float, eta: float) -> None:
    # Reference: scipy.stats.weibull_min with c = shape, scale = eta.
    ref = stats.weibull_min(c=beta, scale=eta)
    np.testing.assert_allclose(wb.sf(HOURS, beta, eta), ref.sf(HOURS), rtol=1e-12, atol=0)
    np.testing.assert_allclose(wb.cdf(HOURS, beta, eta), ref.cdf(HOURS), rtol=1e-12, atol=1e-300)
    # Density and hazard away from t = 0 (infinite there when beta < 1) and where scipy's
    # survival has not underflowed to 0 (its pdf/sf ratio is then undefined).
    t = HOURS[1:][ref.sf(HOURS[1:]) > 1e-250]
    np.testing.assert_allclose(wb.pdf(t, beta, eta), ref.pdf(t), rtol=1e-10)
    # Hazard = pdf / sf (definition), both from scipy.
    np.testing.assert_allclose(wb.hazard(t, beta, eta), ref.pdf(t) / ref.sf(t), rtol=1e-10)
    p = np.array([0.01, 0.1, 0.5, 0.632, 0.9, 0.999])
    np.testing.assert_allclose(wb.percentile(p, beta, eta), ref.ppf(p), rtol=1e-12)
    # scipy.stats.weibull_min mean and variance.
    assert wb.mean_life(beta, eta) == pytest.approx(ref.mean(), rel=1e-12)
    assert wb.Weibull(beta, eta).variance() == pytest.approx(ref.var(), rel=1e-10)


def test_functions_broadcast_over_lamps() -> None:
    # Reference: scipy.stats.weibull_min evaluated lamp by lamp.
    beta = np.array([1.2, 3.5, 5.0])
    eta = np.array([50_000.0, 1_100.0, 26_000.0])
    t = np.array([20_000.0, 900.0, 30_000.0])
    expected = [stats.weibull_min(c=b, scale=e).sf(x) for b, e, x in zip(beta, eta, t, strict=True)]
    np.testing.assert_allclose(wb.sf(t, beta, eta), expected, rtol=1e-12)


@pytest.mark.parametrize("beta", SHAPES)
def test_conditional_failure_matches_closed_form(beta: float) -> None:
    # Closed form P = (S(a) - S(a + w)) / S(a), with S from scipy.stats.weibull_min.
    eta = 10_000.0
    ref = stats.weibull_min(c=beta, scale=eta)
    age = np.array([0.0, 2_000.0, 8_000.0, 15_000.0])
    w = 1_500.0
    expected = (ref.sf(age) - ref.sf(age + w)) / ref.sf(age)
    np.testing.assert_allclose(wb.conditional_failure(age, w, beta, eta), expected, rtol=1e-9)


def test_exponential_conditional_failure_is_memoryless() -> None:
    # Memoryless property of the exponential law (beta = 1): P = 1 - exp(-w / eta) at any age.
    p = wb.conditional_failure(np.array([0.0, 5_000.0, 80_000.0]), 2_000.0, 1.0, 40_000.0)
    np.testing.assert_allclose(p, -math.expm1(-2_000.0 / 40_000.0), rtol=1e-12)


@pytest.mark.parametrize("beta", [1.5, 3.5, 5.0])
@pytest.mark.parametrize("pct", [10.0, 50.0])
def test_scale_from_rated_life(beta: float, pct: float) -> None:
    # eta = L_p / (-ln(1 - p))^(1/beta) (Abernethy); check with scipy's ppf:
    # the distribution built on that scale must put exactly p of lamps dead at the rated life.
    rated = 20_000.0
    eta = float(wb.scale_from_rated_life(rated, beta, pct))
    assert stats.weibull_min(c=beta, scale=eta).ppf(pct / 100.0) == pytest.approx(rated, rel=1e-12)
    if pct == 50.0:
        # B50 closed form: eta = L50 / (ln 2)^(1/beta).
        assert eta == pytest.approx(rated / math.log(2.0) ** (1.0 / beta), rel=1e-12)
        assert wb.Weibull.from_rated_life(rated, beta).sf(rated) == pytest.approx(0.5, rel=1e-12)


def test_weibull_rejects_bad_parameters() -> None:
    # Parameters outside the Weibull family's domain (beta > 0, eta > 0) must be refused.
    with pytest.raises(ValueError):
        wb.Weibull(0.0, 1_000.0)
    with pytest.raises(ValueError):
        wb.Weibull(2.0, -5.0)
    with pytest.raises(ValueError):
        wb.Weibull.from_rated_life(1_000.0, 3.0, rated_percentile=100.0)


def test_scaled_keeps_shape_and_stretches_life() -> None:
    # Accelerated-failure-time scaling (Nelson, Accelerated Testing): S_new(t) = S(t / factor).
    base = wb.Weibull(3.5, 1_200.0)
    stretched = base.scaled(2.0)
    assert stretched.shape == base.shape
    assert stretched.sf(1_800.0) == pytest.approx(float(base.sf(900.0)), rel=1e-12)


positive_shape = st.floats(0.3, 12.0)
positive_scale = st.floats(10.0, 200_000.0)


@settings(max_examples=80, deadline=None)
@given(
    beta=positive_shape,
    eta=positive_scale,
    times=st.lists(st.floats(0.0, 1e6), min_size=2, max_size=30),
)
def test_survival_monotone_and_bounded(beta: float, eta: float, times: list[float]) -> None:
    # Property of any survival function: S in [0, 1] and non-increasing in time.
    t = np.sort(np.array(times))
    s = wb.sf(t, beta, eta)
    assert np.all((s >= 0.0) & (s <= 1.0))
    assert np.all(np.diff(s) <= 0.0)


@settings(max_examples=80, deadline=None)
@given(beta=positive_shape, eta=positive_scale, age=st.floats(0.0, 1e6), w=st.floats(0.0, 1e6))
def test_conditional_failure_is_a_probability(
    beta: float, eta: float, age: float, w: float
) -> None:
    # Property of a conditional probability: 0 <= P <= 1 (with P = 0 for an empty window).
    p = float(wb.conditional_failure(age, w, beta, eta))
    assert 0.0 <= p <= 1.0
    if w == 0.0:
        assert p == 0.0
