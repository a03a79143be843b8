"""Checks of the credibility blend of catalogue and field curves (reliability.credibility)."""

from __future__ import annotations

import math

import numpy as np
import pytest

from service.reliability.credibility import SIGMA_LN_SCALE, blend_curve, credibility_k
from service.reliability.fitting import WeibullFit, fit_weibull, weibayes


def test_no_failures_is_the_catalogue() -> None:
    # Limit Z = 0 (Bühlmann & Gisler, credibility Z = n/(n+k) with n = 0).
    wb = weibayes([5_000.0] * 30, [False] * 30, 1.5)
    got = blend_curve(0, wb, 1.5, 64_963.0)
    assert (got.name, got.shape, got.scale, got.weight) == ("catalogue", 1.5, 64_963.0, 0.0)


def test_one_led_failure_barely_moves_the_catalogue() -> None:
    # The case: 1 failure and 30 survivors; WeiBayes alone gives 89,992 h against the
    # catalogue's 64,963 h. k = 1/(beta^2 sigma^2) (normal-normal conjugate update of ln eta,
    # Bühlmann & Gisler §2-3), hand-computed here.
    k = 1.0 / (1.5**2 * SIGMA_LN_SCALE**2)
    assert credibility_k(1.5) == pytest.approx(k)
    field = WeibullFit(
        1.5, 89_992.0, (1.5, 1.5), (29_597.0, 750_912.0), 0.9, 1, 30, "weibayes", 0.0
    )
    got = blend_curve(1, field, 1.5, 64_963.0)
    z = 1.0 / (1.0 + k)
    assert got.name == "blend" and got.weight == pytest.approx(z)
    assert got.scale == pytest.approx(
        math.exp(z * math.log(89_992.0) + (1 - z) * math.log(64_963.0))
    )
    assert 64_963.0 < got.scale < 70_000.0
    assert got.shape == 1.5  # WeiBayes keeps the catalogue shape


def test_many_failures_is_the_field_mle() -> None:
    # Limit Z -> 1: a well-determined MLE (checked against lifelines in test_fitting) is used.
    rng = np.random.default_rng(5)
    t = 20_000.0 * rng.weibull(4.0, 400)
    fit = fit_weibull(t, np.ones(400, bool))
    got = blend_curve(400, fit, 4.0, 15_000.0, shape_well_determined=True)
    assert got.name == "field" and got.scale == fit.scale and got.shape == fit.shape
    assert got.weight > 0.99


def test_simulated_coverage_of_the_blend_bounds() -> None:
    # Independent Monte Carlo: draw the true scale from the stated prior around the catalogue,
    # simulate a fleet observed to 10,000 h, WeiBayes on the catalogue shape, blend; the 90 %
    # bounds should cover the true scale in about 90 % of trials (normal approximation:
    # accept 0.86-0.94 over 1,000 trials, +/- 2.5 binomial standard errors).
    rng = np.random.default_rng(2026)
    beta, cat = 3.0, 12_000.0
    hits = trials = 0
    for _ in range(1_000):
        true = cat * math.exp(rng.normal(0.0, SIGMA_LN_SCALE))
        life = true * rng.weibull(beta, 60)
        t = np.minimum(life, 10_000.0)
        failed = life <= 10_000.0
        r = int(failed.sum())
        if r == 0:
            continue
        got = blend_curve(r, weibayes(t, failed, beta), beta, cat)
        trials += 1
        hits += got.scale_bounds[0] <= true <= got.scale_bounds[1]
    assert 0.86 <= hits / trials <= 0.94
