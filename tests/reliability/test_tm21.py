"""Checks of the TM-21 projection in service.reliability.tm21 (IES TM-21-11)."""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from service.reliability.tm21 import (
    cap_multiple,
    exponential_lumen_curve,
    format_projection,
    tm21_projection,
)


def _series(
    duration_h: float, B: float, alpha: float, step_h: float = 1_000.0
) -> tuple[np.ndarray, np.ndarray]:
    t = np.arange(0.0, duration_h + 1.0, step_h)
    return t, B * np.exp(-alpha * t)


@settings(max_examples=50, deadline=None)
@given(
    b0=st.floats(0.95, 1.03),
    alpha=st.floats(1e-7, 5e-5),
    duration=st.sampled_from([6_000.0, 8_000.0, 10_000.0, 12_000.0, 15_000.0]),
)
def test_known_b_and_alpha_recovered(b0: float, alpha: float, duration: float) -> None:
    # IES TM-21: data generated from a known B and alpha must come back out;
    # L70 = ln(B / 0.7) / alpha (IES TM-21-11, p = 70 gives ln(100 B / 70)).
    t, phi = _series(duration, b0, alpha)
    res = tm21_projection(t, phi)
    fitted_b = res.B
    assert fitted_b == pytest.approx(b0, rel=1e-9)
    assert res.alpha == pytest.approx(alpha, rel=1e-6)
    l70 = res.projections[70]
    assert l70 is not None
    assert l70 == pytest.approx(math.log(b0 / 0.7) / alpha, rel=1e-6)


def test_early_data_ignored_and_short_window() -> None:
    # IES TM-21-11 window rules: data before 1,000 h ignored; a 6,000-10,000 h test uses its
    # last 5,000 h. Points outside the window are corrupted here and must not move the fit.
    t, phi = _series(8_000.0, 0.99, 8e-6, step_h=500.0)
    phi = phi.copy()
    phi[t < 3_000.0] *= 1.05  # early points off the curve
    res = tm21_projection(t, phi)
    assert res.window_start_h == 3_000.0
    assert res.points_used == 11  # 3,000 .. 8,000 h every 500 h
    assert res.alpha == pytest.approx(8e-6, rel=1e-9)
    t6, phi6 = _series(6_000.0, 1.0, 1e-5, step_h=250.0)
    phi6 = phi6.copy()
    phi6[t6 < 1_000.0] = 1.04  # burn-in bump before 1,000 h
    res6 = tm21_projection(t6, phi6)
    assert res6.window_start_h == 1_000.0
    assert res6.alpha == pytest.approx(1e-5, rel=1e-9)


def test_long_test_uses_last_half_from_nearest_point() -> None:
    # IES TM-21-11: a test longer than 10,000 h uses its last half, from the data point nearest
    # to half the duration (13,000 h test: half = 6,500 h; nearest point 6,800 h, not 5,000 h).
    t = np.array([0, 1000, 2000, 3000, 4000, 5000, 6800, 8000, 9000, 10000, 11000, 12000, 13000.0])
    phi = 0.995 * np.exp(-4e-6 * t)
    phi[t < 6_000] *= 0.97  # earlier points off the curve
    res = tm21_projection(t, phi)
    assert res.test_duration_h == 13_000.0
    assert res.window_start_h == 6_800.0
    assert res.alpha == pytest.approx(4e-6, rel=1e-9)


def test_short_test_and_small_sample_not_projectable() -> None:
    # IES TM-21-11: under 6,000 h of data is not projectable; fewer than 10 units likewise.
    t, phi = _series(5_000.0, 1.0, 1e-5)
    with pytest.raises(ValueError, match="not projectable"):
        tm21_projection(t, phi)
    t, phi = _series(6_000.0, 1.0, 1e-5)
    with pytest.raises(ValueError):
        tm21_projection(t, phi, sample_size=9)


def test_cap_rule_on_its_own() -> None:
    # IES TM-21-11 cap: 6 x test duration for 20 or more units; 5.5 x for 10-19 ([memory]).
    assert cap_multiple(20) == 6.0
    assert cap_multiple(200) == 6.0
    assert cap_multiple(19) == 5.5
    assert cap_multiple(10) == 5.5
    with pytest.raises(ValueError):
        cap_multiple(9)
    # Reported form (IES TM-21): "L70(6k) > 36,000 h" beyond the cap.
    assert format_projection(70, 40_000.0, 6_000.0, 36_000.0) == ("L70(6k) > 36,000 h", True)
    assert format_projection(70, 31_234.0, 6_000.0, 36_000.0) == ("L70(6k) = 31,200 h", False)
    assert format_projection(90, None, 10_500.0, 63_000.0) == ("L90(10.5k) > 63,000 h", True)


def test_cap_applied_to_a_projection() -> None:
    # IES TM-21-11 cap applied end to end: slow decay projects past 6 x 6,000 h = 36,000 h;
    # with 15 units the cap is 5.5 x 6,000 h = 33,000 h ([memory]).
    t, phi = _series(6_000.0, 1.0, 5e-6)  # raw L70 = ln(1/0.7) / 5e-6 = 71,335 h
    res = tm21_projection(t, phi)
    assert res.capped[70] and res.reported[70] == "L70(6k) > 36,000 h"
    assert not res.capped[90]  # L90 = 21,072 h, under the cap
    assert res.reported[90] == "L90(6k) = 21,100 h"
    small = tm21_projection(t, phi, sample_size=15, percents=(70,))
    assert small.cap_h == 33_000.0 and small.reported[70] == "L70(6k) > 33,000 h"


def test_rising_light_has_no_finite_projection() -> None:
    # L_p = ln(100 B / p) / alpha has no positive root when alpha <= 0 (IES TM-21-11 formula).
    t = np.arange(0.0, 7_000.0, 1_000.0)
    res = tm21_projection(t, 1.0 + 1e-6 * t)
    assert res.alpha < 0
    assert res.projections[70] is None
    assert res.capped[70] and res.reported[70].startswith("L70(6k) >")


def test_fit_as_lumen_curve() -> None:
    # The fitted exponential used as an LED depreciation curve reaches 70 % at L70.
    t, phi = _series(10_000.0, 0.99, 6e-6)
    res = tm21_projection(t, phi)
    curve = res.lumen_curve()
    l70 = res.projections[70]
    assert l70 is not None
    assert float(curve.at(l70)) == pytest.approx(0.70, rel=1e-9)
    assert float(exponential_lumen_curve(res.B, res.alpha).at(l70)) == pytest.approx(0.70)


def test_bad_series_rejected() -> None:
    # Interface contract: mismatched, non-increasing or non-positive data raise.
    with pytest.raises(ValueError):
        tm21_projection([0.0, 1_000.0], [1.0])
    with pytest.raises(ValueError):
        tm21_projection([0.0, 7_000.0, 6_000.0], [1.0, 0.9, 0.95])
    with pytest.raises(ValueError):
        tm21_projection([0.0, 6_000.0, 7_000.0], [1.0, 0.0, 0.95])
