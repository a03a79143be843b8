"""Checks of lumen depreciation curves in service.reliability.lumen."""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from service.reliability.lumen import (
    LumenCurve,
    default_lumen_curve,
    exponential_curve,
    maintained_fraction,
)
from service.reliability.technologies import TECHNOLOGIES


def test_incandescent_default_meets_iec_criterion() -> None:
    # Criterion commonly quoted for IEC 60064 (common practice): a lamp
    # at or below 93 % of initial light at 75 % of rated life is unsatisfactory.
    curve = default_lumen_curve("incandescent")
    assert curve.assumed and curve.basis == "rated_life_fraction"
    assert float(curve.at(750.0, 1_000.0)) > 0.93
    # The curve stretches with the voltage-scaled life (common practice): a lamp whose
    # life doubled reaches the same light at twice the hours.
    assert float(curve.at(1_500.0, 2_000.0)) == pytest.approx(float(curve.at(750.0, 1_000.0)))


def test_default_curves_match_practice_anchors() -> None:
    # Common practice: mean lumens at 40 % of rated life about
    # 0.90-0.95 for linear fluorescent, about 0.65-0.75 for metal halide; HPS about 0.9 at
    # 50 %; metal halide loses far more light than linear fluorescent or HPS; halogen holds
    # output better than incandescent.
    lf = default_lumen_curve("linear_fluorescent", rated_life_h=30_000.0)
    mh = default_lumen_curve("metal_halide", rated_life_h=20_000.0)
    hps = default_lumen_curve("high_pressure_sodium", rated_life_h=24_000.0)
    assert 0.90 <= float(lf.at(0.4 * 30_000.0)) <= 0.95
    assert 0.65 <= float(mh.at(0.4 * 20_000.0)) <= 0.75
    assert float(hps.at(0.5 * 24_000.0)) == pytest.approx(0.90, abs=0.02)
    assert float(mh.at(8_000.0)) < float(hps.at(0.4 * 24_000.0)) < 1.0
    inc = default_lumen_curve("incandescent")
    hal = default_lumen_curve("halogen")
    u = np.linspace(0.1, 1.0, 10)
    assert np.all(hal.at(u, 1.0) > inc.at(u, 1.0))


def test_led_default_reaches_l70_at_50000_hours() -> None:
    # Default choice documented in lumen.py: exponential with L70 at 50,000 h.
    led = default_lumen_curve("led")
    assert float(led.at(50_000.0)) == pytest.approx(0.70, rel=1e-12)
    assert float(led.at(0.0)) == 1.0


@pytest.mark.parametrize("tech", TECHNOLOGIES)
def test_every_default_curve_is_valid_and_non_rising(tech: str) -> None:
    # Interface contract: a default exists for every technology, starts at full light and
    # never rises.
    curve = default_lumen_curve(tech)
    assert curve.assumed and curve.source
    hours = np.linspace(0.0, 200_000.0, 2_001)
    life = 1_000.0 if curve.basis == "rated_life_fraction" else None
    f = curve.at(hours, life)
    assert f[0] == pytest.approx(1.0)
    assert np.all(np.diff(f) <= 1e-15) and np.all(f >= 0.0)


def test_points_reproduced_and_linear_data_kept_linear() -> None:
    # PCHIP interpolates its knots and reproduces linear data exactly (Fritsch & Carlson 1980).
    curve = LumenCurve((0.0, 1_000.0, 5_000.0), (1.0, 0.95, 0.75), "hours", False, "test")
    np.testing.assert_allclose(curve.at([0.0, 1_000.0, 5_000.0]), [1.0, 0.95, 0.75])
    np.testing.assert_allclose(curve.at([500.0, 3_000.0]), [0.975, 0.85], rtol=1e-12)


def test_start_and_tail_extension() -> None:
    # Module docstring rules: no point at 0 -> starts at 1.0; beyond the last point a straight
    # line on the last segment's slope, floored at 0; a flat last segment stays flat.
    curve = LumenCurve((2_000.0, 10_000.0), (0.9, 0.7), "hours", False, "test")
    assert float(curve.at(0.0)) == 1.0
    slope = (0.7 - 0.9) / 8_000.0
    assert float(curve.at(14_000.0)) == pytest.approx(0.7 + slope * 4_000.0)
    assert float(curve.at(1e6)) == 0.0
    flat = LumenCurve((0.0, 100.0, 200.0), (1.0, 0.9, 0.9), "hours", False, "test")
    assert float(flat.at(5_000.0)) == pytest.approx(0.9)


def test_shapes_broadcast() -> None:
    # Interface contract: arrays for hours and life_h broadcast together.
    curve = default_lumen_curve("incandescent")
    out = curve.at(np.array([[750.0], [1_500.0]]), np.array([1_000.0, 2_000.0]))
    assert out.shape == (2, 2)
    assert out[0, 0] == pytest.approx(out[1, 1])


@pytest.mark.parametrize(
    ("x", "f", "basis"),
    [
        ((0.0, 1.0), (1.0, 0.0), "hours"),  # zero light
        ((0.0, 1.0), (1.3, 1.0), "hours"),  # above 1.2
        ((0.0, 1.0), (0.9, 0.95), "hours"),  # rising
        ((-1.0, 1.0), (1.0, 0.9), "hours"),  # negative x
        ((0.0, 0.0), (1.0, 0.9), "hours"),  # repeated x
        ((0.0, 1.0), (1.0,), "hours"),  # lengths differ
        ((0.0, 1.0), (1.0, 0.9), "years"),  # unknown basis
    ],
)
def test_invalid_points_rejected(x: tuple[float, ...], f: tuple[float, ...], basis: str) -> None:
    # Interface contract: bad points raise ValueError with a message.
    with pytest.raises(ValueError, match=r"\w"):
        LumenCurve(x, f, basis, False, "bad")


def test_fraction_basis_needs_life() -> None:
    # Interface contract: a rated-life-fraction curve cannot be read without the life in hours.
    with pytest.raises(ValueError, match="life_h"):
        default_lumen_curve("halogen").at(100.0)


def test_maintained_fraction_is_the_cie97_product() -> None:
    # CIE 97 maintenance factor method: light x LLD x survivors.
    out = maintained_fraction([0.84, 1.0], [0.9, 0.8], [0.95, 0.5])
    np.testing.assert_allclose(out, [0.84 * 0.9 * 0.95, 0.4])


def test_exponential_curve_exact() -> None:
    # TM-21 form Phi(t) = B exp(-alpha t) (IES TM-21-11), evaluated without interpolation.
    c = exponential_curve(0.98, 7e-6)
    t = np.array([0.0, 12_345.0, 80_000.0])
    np.testing.assert_allclose(c.at(t), 0.98 * np.exp(-7e-6 * t), rtol=1e-15)
    assert exponential_curve(1.0, -1e-6).at(50_000.0) == 1.0  # rising light held flat


@st.composite
def _curves(draw: st.DrawFn) -> LumenCurve:
    n = draw(st.integers(1, 8))
    gaps = draw(st.lists(st.floats(1.0, 10_000.0), min_size=n, max_size=n))
    drops = draw(st.lists(st.floats(0.0, 0.2), min_size=n, max_size=n))
    xs = np.cumsum(gaps) - gaps[0] * draw(st.sampled_from([0.0, 0.5]))
    f0 = draw(st.floats(0.5, 1.2))
    fs = np.maximum(f0 - np.cumsum(drops), 0.01)
    return LumenCurve(tuple(map(float, xs)), tuple(map(float, fs)), "hours", False, "drawn")


@settings(max_examples=100, deadline=None)
@given(curve=_curves())
def test_interpolated_curve_monotone(curve: LumenCurve) -> None:
    # Property of monotone (PCHIP) interpolation: no overshoot, never rising, never negative.
    t = np.linspace(0.0, 3.0 * curve.x[-1] + 1.0, 4_001)
    f = curve.at(t)
    assert np.all(np.diff(f) <= 1e-12)
    assert np.all(f >= 0.0) and f[0] <= max(1.0, curve.fraction[0]) + 1e-12
    assert not math.isnan(float(f.sum()))


def test_default_efficacy_for_every_technology_within_its_family_range() -> None:
    # The fallback initial lumens (rated watts x lm/W) exist for every technology, and rank as
    # the families are commonly ranked [practice]: filament < mercury < fluorescent < sodium.
    from service.reliability.lumen import DEFAULT_EFFICACY_LM_PER_W

    eff = DEFAULT_EFFICACY_LM_PER_W
    assert set(eff) == set(TECHNOLOGIES)
    assert eff["incandescent"] < eff["halogen"] < eff["mercury_vapour"]
    assert eff["mercury_vapour"] < eff["compact_fluorescent"] < eff["linear_fluorescent"]
    assert eff["linear_fluorescent"] < eff["high_pressure_sodium"]
