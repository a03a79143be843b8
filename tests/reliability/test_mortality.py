"""Weibull fits to a maker's mortality curve, checked against outside references."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy.optimize import curve_fit
from scipy.stats import linregress

from service.reliability.mortality import (
    DISAGREEMENT_WARN,
    MIN_SHAPE,
    fit_mortality_points,
    mortality_problem,
)
from service.reliability.weibull import scale_from_rated_life

RATED_H = 20_000.0  # demo rated life, burn hours
# A maker-style curve read off a chart (invented figures), % of rated life vs % surviving.
MAKER = np.array([[25.0, 98.0], [50.0, 93.0], [75.0, 78.0], [100.0, 52.0], [125.0, 20.0]])


def _weibull_sf(t: np.ndarray, beta: float, eta: float) -> np.ndarray:
    return np.exp(-np.power(t / eta, beta))


@pytest.mark.parametrize(("beta", "eta_frac"), [(1.5, 0.8), (4.2, 1.09), (9.0, 1.0)])
def test_points_on_a_known_weibull_come_back(beta: float, eta_frac: float) -> None:
    # Closed form: points read off S(t) = exp(-(t/eta)^beta) lie exactly on the line
    # ln(-ln S) = beta ln t - beta ln eta, so the fit returns beta and eta to rounding.
    pct = np.array([30.0, 60.0, 90.0, 120.0])
    surv = 100.0 * _weibull_sf(pct / 100.0, beta, eta_frac)
    fit = fit_mortality_points(pct, surv, RATED_H)
    assert fit.shape == pytest.approx(beta, rel=1e-10)
    assert fit.curve_scale_h == pytest.approx(eta_frac * RATED_H, rel=1e-10)
    assert fit.r_squared == pytest.approx(1.0, abs=1e-12)
    assert fit.rms_residual < 1e-9 and fit.max_abs_error_pct < 1e-8
    # The curve's own B50 = eta (ln 2)^(1/beta) (Weibull percentile, closed form).
    assert fit.curve_life_h == pytest.approx(eta_frac * RATED_H * math.log(2) ** (1 / beta))
    # Scale rule: the used scale comes from the rated life, not the curve.
    assert fit.scale_h == pytest.approx(float(scale_from_rated_life(RATED_H, beta, 50.0)))
    assert fit.weibull.percentile(0.5) == pytest.approx(RATED_H, rel=1e-12)


def test_regression_equals_scipy_linregress() -> None:
    # scipy.stats.linregress on the transformed points (x = ln t hours, y = ln(-ln S)).
    t = MAKER[:, 0] / 100.0 * RATED_H
    ref = linregress(np.log(t), np.log(-np.log(MAKER[:, 1] / 100.0)))
    fit = fit_mortality_points(MAKER[:, 0], MAKER[:, 1], RATED_H)
    assert fit.shape == pytest.approx(ref.slope, rel=1e-12)
    assert fit.intercept == pytest.approx(ref.intercept, rel=1e-12)
    assert fit.r_squared == pytest.approx(ref.rvalue**2, rel=1e-12)
    assert fit.curve_scale_h == pytest.approx(math.exp(-ref.intercept / ref.slope), rel=1e-12)
    # Point order does not matter.
    rev = fit_mortality_points(MAKER[::-1, 0], MAKER[::-1, 1], RATED_H)
    assert rev.shape == pytest.approx(fit.shape, rel=1e-12)


def _curve_fit(pct: np.ndarray, surv: np.ndarray, p0: tuple[float, float]) -> np.ndarray:
    t = pct / 100.0 * RATED_H
    popt, _ = curve_fit(_weibull_sf, t, surv / 100.0, p0=p0, maxfev=10_000)
    return np.asarray(popt)


@pytest.mark.parametrize("beta", [2.0, 3.5, 6.0])
def test_close_to_nonlinear_least_squares_on_chart_readings(beta: float) -> None:
    # scipy.optimize.curve_fit minimises squared errors in S itself; the probability plot
    # minimises them in ln(-ln S), whose slope 1/(S ln S) stretches points near 0 % and 100 %.
    # The two estimators agree exactly on exact points, and differ on noisy ones by how the
    # noise is weighted. Points read off a chart to the nearest whole percent (error <= 0.5
    # points) leave them within 3 % on the shape and 1 % on the median life.
    eta = 1.1 * RATED_H
    pct = np.array([20.0, 40.0, 60.0, 80.0, 100.0, 120.0, 140.0])
    surv = np.round(100.0 * _weibull_sf(pct / 100.0 * RATED_H, beta, eta))
    keep = (surv > 0) & (surv < 100)
    pct, surv = pct[keep], surv[keep]
    fit = fit_mortality_points(pct, surv, RATED_H)
    b_nl, eta_nl = _curve_fit(pct, surv, (fit.shape, fit.curve_scale_h))
    assert b_nl == pytest.approx(fit.shape, rel=0.03)
    assert eta_nl * math.log(2) ** (1 / b_nl) == pytest.approx(fit.curve_life_h, rel=0.01)
    # Exact points: both methods find the same Weibull (curve_fit to its own tolerance).
    exact = 100.0 * _weibull_sf(pct / 100.0 * RATED_H, beta, eta)
    b_ex, eta_ex = _curve_fit(pct, exact, (beta * 0.8, eta * 1.2))
    assert b_ex == pytest.approx(beta, rel=1e-6) and eta_ex == pytest.approx(eta, rel=1e-6)


def test_each_method_is_best_in_its_own_metric() -> None:
    # On the scattered maker curve the shapes differ a lot (2.7 against 3.6), so the check is
    # optimality: curve_fit has the smaller squared error in S, the probability plot the
    # smaller one in ln(-ln S); and both put the median near the same hours (within 3 %).
    fit = fit_mortality_points(MAKER[:, 0], MAKER[:, 1], RATED_H)
    b_nl, eta_nl = _curve_fit(MAKER[:, 0], MAKER[:, 1], (fit.shape, fit.curve_scale_h))
    t = MAKER[:, 0] / 100.0 * RATED_H
    s = MAKER[:, 1] / 100.0
    s_ls = _weibull_sf(t, fit.shape, fit.curve_scale_h)
    s_nl = _weibull_sf(t, b_nl, eta_nl)
    assert np.sum((s_nl - s) ** 2) <= np.sum((s_ls - s) ** 2)

    def lls(v: np.ndarray) -> np.ndarray:
        return np.log(-np.log(v))

    assert np.sum((lls(s_ls) - lls(s)) ** 2) <= np.sum((lls(s_nl) - lls(s)) ** 2)
    assert eta_nl * math.log(2) ** (1 / b_nl) == pytest.approx(fit.curve_life_h, rel=0.03)
    np.testing.assert_allclose(fit.fitted_pct_surviving, 100.0 * s_ls, rtol=1e-12)


def test_same_as_reliability_rank_regression_on_a_large_sample() -> None:
    # reliability.Fitters.Fit_Weibull_2P, least squares by rank regression on Y ("RRY"), plots a
    # complete sample at Benard's median ranks F_i = (i - 0.3) / (n + 0.4) and regresses
    # ln(-ln(1 - F)) on ln t: fed the same points, our fit must give the same Weibull. Then,
    # probabilistically, both land near the generating law (n = 2,000: shape within 10 %).
    from reliability.Fitters import Fit_Weibull_2P

    beta, eta = 4.0, 10_000.0
    rng = np.random.default_rng(20240605)
    lives = np.sort(eta * rng.weibull(beta, 2_000))
    ref = Fit_Weibull_2P(
        failures=lives, method="RRY", print_results=False, show_probability_plot=False
    )
    n = lives.size
    ranks = (np.arange(1, n + 1) - 0.3) / (n + 0.4)
    fit = fit_mortality_points(100.0 * lives / eta, 100.0 * (1.0 - ranks), eta)
    assert fit.shape == pytest.approx(ref.beta, rel=1e-9)
    assert fit.curve_scale_h == pytest.approx(ref.alpha, rel=1e-9)
    assert fit.shape == pytest.approx(beta, rel=0.10)
    assert fit.curve_scale_h == pytest.approx(eta, rel=0.03)
    # method="LS" picks RRX or RRY by likelihood; either way it is near ours on this sample.
    ls = Fit_Weibull_2P(
        failures=lives, method="LS", print_results=False, show_probability_plot=False
    )
    assert ls.beta == pytest.approx(fit.shape, rel=0.02)


def test_rated_life_sets_the_scale_when_the_curve_disagrees() -> None:
    # A curve whose own median sits at 130 % of the rated life: the shape is the curve's slope,
    # the scale comes from the rated life, and a warning reports the disagreement.
    beta = 3.0
    pct = np.array([50.0, 100.0, 150.0, 200.0])
    eta_curve = 1.3 / math.log(2) ** (1 / beta)  # curve B50 at 1.3 x rated life
    surv = 100.0 * _weibull_sf(pct / 100.0, beta, eta_curve)
    fit = fit_mortality_points(pct, surv, RATED_H)
    assert fit.shape == pytest.approx(beta, rel=1e-10)
    assert fit.curve_life_h == pytest.approx(1.3 * RATED_H, rel=1e-10)
    assert fit.life_disagreement == pytest.approx(0.3, rel=1e-9)
    assert fit.life_disagreement > DISAGREEMENT_WARN
    assert fit.weibull.percentile(0.5) == pytest.approx(RATED_H, rel=1e-12)
    assert fit.curve_weibull.percentile(0.5) == pytest.approx(1.3 * RATED_H, rel=1e-10)
    assert fit.warnings and "rated life sets the scale" in fit.warnings[0]
    # At a B10 rating the scale follows the B10 formula eta = L10 / (-ln 0.9)^(1/beta).
    b10 = fit_mortality_points(pct, surv, RATED_H, rated_percentile=10.0)
    assert b10.scale_h == pytest.approx(RATED_H / (-math.log(0.9)) ** (1 / beta), rel=1e-12)
    close = fit_mortality_points(pct, 100.0 * _weibull_sf(pct / 100.0, beta, 1.05), RATED_H)
    assert close.warnings == ()


@pytest.mark.parametrize(
    ("pct", "surv", "needle"),
    [
        ([50.0], [90.0], "at least 2"),
        ([50.0, 50.0], [90.0, 80.0], "2 different"),
        ([0.0, 50.0], [90.0, 80.0], "> 0"),
        ([50.0, 80.0], [100.0, 50.0], "(0, 100)"),
        ([50.0, 80.0], [40.0, 60.0], "falling"),
        ([99.0, 100.0], [99.0, 1.0], "above 50"),
        ([50.0, 80.0], [90.0], "as many"),
    ],
)
def test_unusable_points_are_refused(pct: list[float], surv: list[float], needle: str) -> None:
    problem = mortality_problem(pct, surv)
    assert problem is not None and needle in problem
    with pytest.raises(ValueError) as err:
        fit_mortality_points(pct, surv, RATED_H)
    assert str(err.value) == problem


def test_bad_rated_life_is_refused() -> None:
    with pytest.raises(ValueError, match="rated life"):
        fit_mortality_points(MAKER[:, 0], MAKER[:, 1], 0.0)
    with pytest.raises(ValueError, match="percentile"):
        fit_mortality_points(MAKER[:, 0], MAKER[:, 1], RATED_H, rated_percentile=100.0)


def test_a_nearly_flat_curve_is_refused_not_overflowed() -> None:
    # Survival barely falling over a wide span gives a probability-plot slope near 0;
    # exp(-intercept/slope) would overflow, so the rule refuses it with a reason.
    pts_life, pts_surv = [1.0, 1000.0], [50.0, 49.999]
    problem = mortality_problem(pts_life, pts_surv)
    assert problem is not None and f"{MIN_SHAPE:g}" in problem
    with pytest.raises(ValueError, match="too flat"):
        fit_mortality_points(pts_life, pts_surv, 1000.0)
