"""Weibull MLE, WeiBayes, Kaplan-Meier and curve-choice checks against lifelines and reliability."""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import assume, given, settings
from hypothesis import strategies as st
from scipy import stats

from service.reliability.fitting import (
    WeibullFit,
    choose_curve,
    fit_weibull,
    kaplan_meier,
    weibayes,
    weibull_log_likelihood,
)


def _field_records(n: int, shape: float, scale: float, seed: int) -> tuple[np.ndarray, np.ndarray]:
    """Lamp lives censored by a group relamp at a random age (demo data)."""
    rng = np.random.default_rng(seed)
    life = scale * rng.weibull(shape, n)
    removal = rng.uniform(0.4 * scale, 1.4 * scale, n)
    return np.minimum(life, removal), life <= removal


@pytest.fixture(scope="module")
def records() -> tuple[np.ndarray, np.ndarray]:
    return _field_records(80, 3.5, 12000.0, seed=3)


def test_mle_matches_lifelines(records: tuple[np.ndarray, np.ndarray]) -> None:
    # lifelines WeibullFitter: S(t) = exp(-(t/lambda_)^rho_), right-censored MLE.
    from lifelines import WeibullFitter

    t, failed = records
    ref = WeibullFitter().fit(t, failed)
    fit = fit_weibull(t, failed)
    assert fit.method == "mle"
    assert fit.n_failures == int(failed.sum()) and fit.n_censored == int((~failed).sum())
    assert fit.shape == pytest.approx(ref.rho_, rel=1e-5)
    assert fit.scale == pytest.approx(ref.lambda_, rel=1e-5)
    assert fit.log_likelihood == pytest.approx(ref.log_likelihood_, abs=1e-6)


@pytest.mark.parametrize("confidence", [0.90, 0.95])
def test_mle_and_bounds_match_reliability(
    records: tuple[np.ndarray, np.ndarray], confidence: float
) -> None:
    # reliability Fit_Weibull_2P: alpha = scale, beta = shape; bounds are Wald on the log of each
    # parameter from the Fisher information.
    from reliability.Fitters import Fit_Weibull_2P

    t, failed = records
    ref = Fit_Weibull_2P(
        failures=t[failed],
        right_censored=t[~failed],
        show_probability_plot=False,
        print_results=False,
        CI=confidence,
    )
    fit = fit_weibull(t, failed, confidence=confidence)
    assert fit.shape == pytest.approx(ref.beta, rel=1e-5)
    assert fit.scale == pytest.approx(ref.alpha, rel=1e-5)
    np.testing.assert_allclose(fit.shape_bounds, (ref.beta_lower, ref.beta_upper), rtol=1e-4)
    np.testing.assert_allclose(fit.scale_bounds, (ref.alpha_lower, ref.alpha_upper), rtol=1e-4)
    assert fit.confidence == confidence


def test_mle_complete_sample_matches_scipy() -> None:
    # scipy.stats.weibull_min.fit with loc fixed at 0 is the uncensored MLE.
    rng = np.random.default_rng(5)
    t = 3000.0 * rng.weibull(1.8, 200)
    fit = fit_weibull(t, np.ones(t.size, dtype=bool))
    c, _, scale = stats.weibull_min.fit(t, floc=0.0)
    assert fit.shape == pytest.approx(c, rel=1e-4)
    assert fit.scale == pytest.approx(scale, rel=1e-4)


def test_mle_needs_two_distinct_failure_times() -> None:
    with pytest.raises(ValueError):
        fit_weibull([100.0, 200.0, 300.0], [True, False, False])
    with pytest.raises(ValueError):
        fit_weibull([100.0, 100.0, 300.0], [True, True, False])


@settings(max_examples=25, deadline=None)
@given(seed=st.integers(0, 10_000), shape=st.floats(0.7, 6.0), n=st.integers(8, 60))
def test_mle_is_a_maximum(seed: int, shape: float, n: int) -> None:
    # Definition of the maximum-likelihood estimate: no nearby parameters do better.
    t, failed = _field_records(n, shape, 1000.0, seed)
    assume(np.unique(t[failed]).size >= 2)
    fit = fit_weibull(t, failed)
    best = weibull_log_likelihood(t, failed, fit.shape, fit.scale)
    assert best == pytest.approx(fit.log_likelihood)
    for db, de in ((1.01, 1.0), (0.99, 1.0), (1.0, 1.01), (1.0, 0.99), (1.01, 1.01)):
        assert weibull_log_likelihood(t, failed, fit.shape * db, fit.scale * de) <= best + 1e-9
    assert fit.shape_bounds[0] < fit.shape < fit.shape_bounds[1]
    assert fit.scale_bounds[0] < fit.scale < fit.scale_bounds[1]


def test_weibayes_matches_reliability_force_beta(records: tuple[np.ndarray, np.ndarray]) -> None:
    # reliability Fit_Weibull_2P(force_beta=...) is the WeiBayes scale (Abernethy,
    # *The New Weibull Handbook*).
    from reliability.Fitters import Fit_Weibull_2P

    t, failed = records
    ref = Fit_Weibull_2P(
        failures=t[failed],
        right_censored=t[~failed],
        show_probability_plot=False,
        print_results=False,
        force_beta=4.0,
    )
    fit = weibayes(t, failed, 4.0)
    assert fit.method == "weibayes"
    assert fit.scale == pytest.approx(ref.alpha, rel=1e-6)
    assert fit.shape_bounds == (4.0, 4.0)


def test_weibayes_zero_failures_assumes_one() -> None:
    # Abernethy: with no failures, eta = (sum t^beta)^(1/beta) ("assume one failure"), a 63.2%
    # lower bound: the chi-square bound with 2 dof at confidence 1 - 1/e equals it.
    t = np.array([4000.0, 5200.0, 6100.0, 7000.0])
    expected = float(np.sum(t**3.0) ** (1.0 / 3.0))
    fit = weibayes(t, np.zeros(t.size, dtype=bool), 3.0, confidence=1.0 - np.exp(-1.0))
    assert fit.scale == pytest.approx(expected)
    assert fit.scale_bounds[0] == pytest.approx(expected)
    assert fit.scale_bounds[1] == np.inf
    assert fit.n_failures == 0


def test_weibayes_bound_coverage_complete_samples() -> None:
    # Nelson, *Applied Life Data Analysis*: for complete samples 2 sum(t^beta)/eta^beta is
    # chi-square with 2r dof, so the two-sided interval (lower from 2r+2 dof, upper from 2r dof)
    # covers eta with probability P(chi2_2r <= q_hi(2r+2)) - (1-c)/2. Monte Carlo, 3,000 samples.
    shape, eta, r, conf = 2.5, 1000.0, 5, 0.90
    rng = np.random.default_rng(17)
    samples = eta * rng.weibull(shape, size=(3000, r))
    hits = 0
    for row in samples:
        lo, hi = weibayes(row, np.ones(r, dtype=bool), shape, confidence=conf).scale_bounds
        hits += lo <= eta <= hi
    exact = stats.chi2.cdf(stats.chi2.ppf(0.5 + conf / 2, 2 * r + 2), 2 * r) - (1 - conf) / 2
    se = np.sqrt(exact * (1 - exact) / samples.shape[0])
    assert abs(hits / samples.shape[0] - exact) <= 3 * se


def _km_reference(t: np.ndarray, failed: np.ndarray, confidence: float) -> None:
    # lifelines KaplanMeierFitter: product-limit estimate with exponential Greenwood bounds.
    from lifelines import KaplanMeierFitter

    ref = KaplanMeierFitter(alpha=1.0 - confidence).fit(t, failed)
    km = kaplan_meier(t, failed, confidence=confidence)
    np.testing.assert_allclose(km.t, ref.timeline)
    np.testing.assert_allclose(km.survival, ref.survival_function_.to_numpy()[:, 0], atol=1e-12)
    ci = ref.confidence_interval_.to_numpy()
    np.testing.assert_allclose(km.lower, ci[:, 0], atol=1e-10)
    np.testing.assert_allclose(km.upper, ci[:, 1], atol=1e-10)
    table = ref.event_table
    np.testing.assert_array_equal(km.at_risk, table["at_risk"].to_numpy())
    np.testing.assert_array_equal(km.events, table["observed"].to_numpy())


@pytest.mark.parametrize("confidence", [0.90, 0.95])
def test_kaplan_meier_matches_lifelines_with_ties(confidence: float) -> None:
    t, failed = _field_records(120, 2.5, 5000.0, seed=9)
    t = np.round(t / 250.0) * 250.0 + 250.0  # hour-meter readings in 250 h steps: many ties
    _km_reference(t, failed, confidence)


def test_kaplan_meier_matches_lifelines_all_failed() -> None:
    rng = np.random.default_rng(2)
    t = np.round(1000.0 * rng.weibull(3.0, 40))
    _km_reference(t, np.ones(t.size, dtype=bool), 0.95)


def test_kaplan_meier_step_lookup() -> None:
    # Kaplan & Meier 1958: S drops by (1 - d/n) at each failure time; censoring leaves it flat.
    km = kaplan_meier([10.0, 20.0, 30.0, 40.0], [True, False, True, False])
    np.testing.assert_allclose(
        km.survival_at([0.0, 9.9, 10.0, 25.0, 30.0, 99.0]), [1.0, 1.0, 0.75, 0.75, 0.375, 0.375]
    )


def _fit_with_bounds(lo: float, hi: float) -> WeibullFit:
    return WeibullFit(3.0, 1000.0, (lo, hi), (900.0, 1100.0), 0.9, 20, 5, "mle", -100.0)


def test_choose_curve_rule() -> None:
    # Common practice (Abernethy, *The New Weibull Handbook*): enough failures -> field MLE; few -> WeiBayes on the catalogue shape;
    # none -> catalogue.
    tight = _fit_with_bounds(2.4, 3.8)
    wide = _fit_with_bounds(1.0, 6.0)
    assert choose_curve(0, None, 3.5, 1e4).method == "catalogue"
    assert not choose_curve(0, None, 3.5, 1e4).use_field
    few = choose_curve(4, None, 3.5, 1e4)
    assert few.method == "weibayes" and not few.use_field
    ok = choose_curve(20, tight, 3.5, 1e4)
    assert ok.use_field and ok.method == "mle"
    too_wide = choose_curve(20, wide, 3.5, 1e4)
    assert not too_wide.use_field and too_wide.method == "weibayes"
    assert choose_curve(9, tight, 3.5, 1e4).method == "weibayes"
    assert choose_curve(10, tight, 3.5, 1e4).use_field
