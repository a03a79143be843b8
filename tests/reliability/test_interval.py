"""Checks of the interval-censored Weibull MLE (service.reliability.interval)."""

from __future__ import annotations

import numpy as np
import pytest
from lifelines import WeibullFitter

from service.reliability.fitting import fit_weibull
from service.reliability.interval import fit_interval_weibull, interval_log_likelihood


def _records(seed: int) -> tuple[np.ndarray, np.ndarray]:
    """Lamps of a Weibull(3, 10,000 h) fleet inspected every 2,000 h, some reported, some not."""
    rng = np.random.default_rng(seed)
    t = 10_000.0 * rng.weibull(3.0, 300)
    visit = 2_000.0
    reported = rng.random(300) < 0.5
    horizon = 14_000.0
    lo = np.where(t > horizon, horizon, np.where(reported, t, np.floor(t / visit) * visit))
    hi = np.where(t > horizon, np.inf, np.where(reported, t, np.floor(t / visit) * visit + visit))
    return lo, hi


def test_against_lifelines_interval_censoring() -> None:
    # lifelines WeibullFitter.fit_interval_censoring (exact: lower == upper, censored:
    # upper = inf); lambda_ is the scale, rho_ the shape.
    lo, hi = _records(7)
    ours = fit_interval_weibull(lo, hi)
    wf = WeibullFitter().fit_interval_censoring(lo, hi)
    assert ours.shape == pytest.approx(wf.rho_, rel=2e-4)
    assert ours.scale == pytest.approx(wf.lambda_, rel=2e-4)
    assert ours.log_likelihood == pytest.approx(wf.log_likelihood_, rel=1e-6)
    # lifelines' standard errors are on the parameters themselves: compare the 90 % widths.
    se_rho = float(wf.summary.loc["rho_", "se(coef)"])
    assert np.log(ours.shape_bounds[1] / ours.shape) == pytest.approx(
        1.6448536 * se_rho / wf.rho_, rel=0.05
    )
    assert ours.n_interval > 0 and ours.n_exact > 0 and ours.n_censored > 0


def test_exact_and_right_censored_only_is_the_ordinary_mle() -> None:
    # With no intervals the likelihood is the right-censored one: our closed-form MLE
    # (fitting.fit_weibull, itself checked against lifelines and reliability).
    rng = np.random.default_rng(3)
    t = 5_000.0 * rng.weibull(2.0, 80)
    c = np.minimum(t, 6_000.0)
    failed = t <= 6_000.0
    ours = fit_interval_weibull(c, np.where(failed, c, np.inf))
    ref = fit_weibull(c, failed)
    assert ours.shape == pytest.approx(ref.shape, rel=1e-5)
    assert ours.scale == pytest.approx(ref.scale, rel=1e-5)


def test_found_dark_as_survivors_biases_life_upwards() -> None:
    # The bias the interval records remove: lamps found dark stored as "still burning" at
    # the visit make the scale larger than the interval-censored fit (same data).
    lo, hi = _records(11)
    honest = fit_interval_weibull(lo, hi)
    found_dark = (hi > lo) & np.isfinite(hi)
    biased = fit_interval_weibull(np.where(found_dark, hi, lo), np.where(found_dark, np.inf, hi))
    assert biased.scale > honest.scale * 1.05
    assert honest.scale == pytest.approx(10_000.0, rel=0.08)  # the simulated truth


def test_loglik_and_checks() -> None:
    # Hand value: one interval (0, eta] has probability 1 - e^-1.
    assert interval_log_likelihood([0.0], [100.0], 2.0, 100.0) == pytest.approx(
        np.log(1 - np.exp(-1.0))
    )
    with pytest.raises(ValueError, match="failure"):
        fit_interval_weibull([10.0], [np.inf])
    with pytest.raises(ValueError, match="upper"):
        fit_interval_weibull([10.0], [5.0])
