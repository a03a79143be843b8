"""Resolved lamp models: catalogue values, mortality fits, technology defaults, fleet table."""

from __future__ import annotations

import math
from types import SimpleNamespace
from typing import Any

import numpy as np
import pytest

from service.catalogue.lamp_model import lamp_type_table, resolve_lamp_model
from service.catalogue.mortality import check_mortality_points, fit_mortality_points
from service.reliability.fleet import TABLE_COLUMNS, LampTypeSpec, LampTypeTable, evaluate_fleet
from service.reliability.lumen import LumenCurve, default_lumen_curve
from service.reliability.mortality import fit_mortality_points as core_fit
from service.reliability.technologies import BALLAST_POWER_GAIN, TECHNOLOGY_DEFAULTS
from service.reliability.weibull import scale_from_rated_life


def lamp_type(**over: Any) -> SimpleNamespace:
    """A lamp-type-like object with only the required catalogue fields set."""
    base: dict[str, Any] = {
        "id": 1,
        "code": "LT-T8-36",
        "technology": "linear_fluorescent",
        "rated_watts": 36.0,
        "rated_volts": 230.0,
        "rated_life_h": 20_000.0,
        "rated_percentile": 50.0,
        "rated_hours_per_start": None,
        "second_hours_per_start": None,
        "second_cycle_life_h": None,
        "weibull_shape": None,
        "mortality_points": None,
        "lumen_points": None,
        "lumen_basis": "hours",
        "initial_lumens": None,
        "life_exponent": None,
        "light_exponent": None,
        "power_exponent": None,
        "ballast_behaviour": None,
        "driver_min_volts": None,
        "driver_max_volts": None,
        "unit_price": 3.5,
        "contains_mercury": True,
        "rupture_risk": False,
    }
    base.update(over)
    return SimpleNamespace(**base)


def test_defaults_fill_every_gap() -> None:
    m = resolve_lamp_model(lamp_type())
    d = TECHNOLOGY_DEFAULTS["linear_fluorescent"]
    assert m.shape == d.shape and m.sources["shape"] == "default"
    # eta = L50 / (ln 2)^(1/beta) (Abernethy, Weibull Handbook)
    assert m.scale_h == pytest.approx(20_000.0 / math.log(2.0) ** (1.0 / d.shape), rel=1e-12)
    assert m.life_exponent == d.life_exponent and m.sources["life_exponent"] == "default"
    assert m.ballast_behaviour == "electronic" and m.sources["ballast_behaviour"] == "default"
    assert m.ballast_gain == BALLAST_POWER_GAIN["electronic"]
    assert m.rated_hours_per_start == d.rated_hours_per_start
    assert m.second_life_ratio is None and m.driver_range is None
    assert m.lumen_curve == default_lumen_curve("linear_fluorescent", 20_000.0)
    assert m.lumen_curve.assumed and m.sources["lumen_curve"] == "default"
    assert not m.is_filament


def test_catalogue_values_win() -> None:
    m = resolve_lamp_model(
        lamp_type(
            technology="led",
            weibull_shape=1.2,
            rated_percentile=10.0,
            rated_life_h=50_000.0,
            life_exponent=2.5,
            light_exponent=0.8,
            power_exponent=1.1,
            ballast_behaviour="led_driver",
            driver_min_volts=200.0,
            driver_max_volts=250.0,
            rated_hours_per_start=4.0,
            second_hours_per_start=12.0,
            second_cycle_life_h=60_000.0,
            lumen_points=[[0, 1.0], [25_000, 0.85], [50_000, 0.7]],
            contains_mercury=False,
        )
    )
    assert m.shape == 1.2 and m.sources["shape"] == "catalogue"
    # B10 life: eta = L10 / (-ln 0.9)^(1/beta) (Abernethy, Weibull Handbook)
    assert m.scale_h == pytest.approx(50_000.0 / (-math.log(0.9)) ** (1 / 1.2), rel=1e-12)
    assert (m.life_exponent, m.light_exponent, m.power_exponent) == (2.5, 0.8, 1.1)
    assert m.driver_range == (200.0, 250.0) and m.sources["driver_range"] == "catalogue"
    assert m.second_life_ratio == pytest.approx(1.2)
    assert m.lumen_curve.x == (0.0, 25_000.0, 50_000.0) and not m.lumen_curve.assumed
    assert m.sources["lumen_curve"] == "catalogue"


def test_filament_lamp_has_no_ballast_gain_and_rated_life_basis_curve() -> None:
    m = resolve_lamp_model(lamp_type(technology="halogen", rated_life_h=2_000.0))
    assert m.is_filament and m.ballast_behaviour == "none" and math.isnan(m.ballast_gain)
    assert m.lumen_curve.basis == "rated_life_fraction"
    assert m.rated_hours_per_start is None
    assert m.life_ratio_floor == TECHNOLOGY_DEFAULTS["halogen"].life_ratio_floor


def test_mortality_points_set_the_shape_and_rated_life_the_scale() -> None:
    # Points read off an exact Weibull S(t) = exp(-(t/eta)^beta), t in % of rated life, whose
    # own median sits at eta (ln 2)^(1/beta) = 1.0 x rated life (closed form).
    beta, eta = 4.2, 1.09
    pct = np.array([40.0, 70.0, 100.0, 130.0])
    surv = 100.0 * np.exp(-((pct / 100.0 / eta) ** beta))
    pts = [[float(a), float(b)] for a, b in zip(pct, surv, strict=True)]
    fit = fit_mortality_points(pts)  # catalogue adapter, hours as rated-life fractions
    assert fit.shape == pytest.approx(beta, rel=1e-9)
    assert fit.curve_scale_h == pytest.approx(eta, rel=1e-9)
    m = resolve_lamp_model(lamp_type(mortality_points=pts))
    assert m.shape == pytest.approx(beta, rel=1e-9) and m.sources["shape"] == "fit"
    # Scale from the catalogue rated life (B50, weibull.scale_from_rated_life), not the curve.
    assert m.scale_h == pytest.approx(float(scale_from_rated_life(20_000.0, m.shape, 50.0)))
    assert m.mortality_fit is not None and m.mortality_fit_used
    assert m.mortality_fit.curve_scale_h == pytest.approx(eta * 20_000.0, rel=1e-9)
    assert m.mortality_fit.scale_h == pytest.approx(m.scale_h, rel=1e-12)
    # The core fit with the same points and rated life is what the model holds.
    core = core_fit(pct, surv, 20_000.0, 50.0)
    assert m.mortality_fit == core


def test_catalogue_shape_wins_over_mortality_points_which_are_still_shown() -> None:
    pts = [[50.0, 96.0], [100.0, 50.0], [125.0, 20.0]]
    m = resolve_lamp_model(lamp_type(mortality_points=pts, weibull_shape=6.0))
    assert m.shape == 6.0 and m.sources["shape"] == "catalogue"
    assert m.mortality_fit is not None and not m.mortality_fit_used
    assert m.mortality_fit.shape != 6.0


def test_stored_points_that_no_longer_fit_fall_back_to_the_default_shape() -> None:
    # Survival rising with hours cannot be a mortality curve (slope <= 0 on the plot).
    m = resolve_lamp_model(lamp_type(mortality_points=[[50.0, 40.0], [100.0, 60.0]]))
    assert m.shape == TECHNOLOGY_DEFAULTS["linear_fluorescent"].shape
    assert m.sources["shape"] == "default" and m.mortality_fit is None
    assert "falling" in m.sources["mortality_points"]


def test_mortality_fit_matches_least_squares_on_the_probability_plot() -> None:
    # Noisy maker points: compare with scipy's linear regression on ln(-ln S) vs ln t
    # (textbook Weibull probability plot).
    from scipy.stats import linregress

    pts = [[25.0, 98.0], [50.0, 93.0], [75.0, 78.0], [100.0, 52.0], [125.0, 20.0]]
    a = np.asarray(pts)
    ref = linregress(np.log(a[:, 0] / 100.0), np.log(-np.log(a[:, 1] / 100.0)))
    assert fit_mortality_points(pts).shape == pytest.approx(ref.slope, rel=1e-9)


@pytest.mark.parametrize(
    "pts",
    [
        [[50.0, 90.0]],
        [[50.0, 90.0], [50.0, 80.0]],
        [[0.0, 90.0], [50.0, 80.0]],
        [[50, 100], [80, 50]],
        [[50.0, 90.0, 1.0], [80.0, 50.0]],
        [[50.0, 40.0], [100.0, 60.0]],
    ],
)
def test_mortality_fit_rejects_unusable_points(pts: list[list[float]]) -> None:
    assert check_mortality_points(pts) is not None
    with pytest.raises(ValueError):
        fit_mortality_points(pts)


def test_table_matches_the_numeric_core_from_specs() -> None:
    lts = [
        lamp_type(),
        lamp_type(id=2, code="H", technology="halogen", rated_life_h=2_000.0, weibull_shape=3.0),
        lamp_type(
            id=3, code="MH", technology="metal_halide", rated_life_h=15_000.0, rated_percentile=40.0
        ),
        lamp_type(
            id=4,
            code="LED",
            technology="led",
            rated_life_h=50_000.0,
            driver_min_volts=200.0,
            driver_max_volts=250.0,
        ),
    ]
    models = [resolve_lamp_model(lt) for lt in lts]
    table = lamp_type_table(models)
    specs = [
        LampTypeSpec("linear_fluorescent", 20_000.0, 230.0),
        LampTypeSpec("halogen", 2_000.0, 230.0, shape=3.0),
        LampTypeSpec("metal_halide", 15_000.0, 230.0, rated_percentile=40.0),
        # LED: rated life is L70; failures default to B10 = the L70 hours (the catalogue's
        # stated assumption), i.e. a B10 life in the core's terms.
        LampTypeSpec("led", 50_000.0, 230.0, rated_percentile=10.0, driver_range=(200.0, 250.0)),
    ]
    ref = LampTypeTable.from_specs(specs)
    for name in TABLE_COLUMNS:
        np.testing.assert_allclose(getattr(table, name), getattr(ref, name), rtol=1e-12)
    # Fleet evaluation on both tables gives the same answers.
    idx = np.array([0, 1, 2, 3, 0])
    age = np.array([1_000.0, 500.0, 8_000.0, 20_000.0, 15_000.0])
    volts = np.array([235.0, 220.0, 240.0, 260.0, np.nan])
    a = evaluate_fleet(table, idx, age, volts, np.nan, 2_000.0)
    b = evaluate_fleet(ref, idx, age, volts, np.nan, 2_000.0)
    np.testing.assert_allclose(a.p_fail_horizon, b.p_fail_horizon, rtol=1e-12)
    np.testing.assert_allclose(a.lumen_fraction, b.lumen_fraction, rtol=1e-12)
    assert isinstance(table.lumen_curves[0], LumenCurve)
