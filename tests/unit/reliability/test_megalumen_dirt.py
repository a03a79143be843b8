"""Luminaire dirt in the cost per megalumen-hour (service.reliability.megalumen)."""

from __future__ import annotations

import numpy as np
import pytest
from scipy import integrate

from service.reliability.megalumen import cost_per_megalumen_hour
from service.reliability.renewal import weibull_renewal


def _lmf(t_h: np.ndarray) -> np.ndarray:
    # A sawtooth of our own: light falls 10 % per 4,000 h and is restored every 4,000 h.
    return 1.0 - 0.1 * np.mod(np.asarray(t_h, dtype=float), 4_000.0) / 4_000.0


def test_with_lamps_always_burning_the_delivered_light_is_the_dirt_average() -> None:
    # Renewal argument [Cox, *Renewal Theory*, ch. 4]: with L = 1 a position always holds a
    # burning lamp, so E[light at t] = LMF(t) and the mean over (0, T] is (1/T) ∫ LMF, here
    # by scipy.integrate.quad (independent of the core's trapezoid on its renewal grid).
    curve = weibull_renewal(1.0, 10_000.0, 30_000.0)
    survival = lambda t: np.exp(-np.asarray(t) / 10_000.0)  # noqa: E731
    res = cost_per_megalumen_hour(
        [6_000.0, 9_000.0],
        curve,
        20.0,
        30.0,
        lamp_watts=0.0,
        tariff_per_kwh=0.0,
        initial_lumens=1_000.0,
        lumen_fraction=lambda t: np.ones_like(np.asarray(t, dtype=float)),
        survival=survival,
        luminaire_factor=_lmf,
        spot_luminaire_factor=0.95,
    )
    for i, big_t in enumerate((6_000.0, 9_000.0)):
        exact, _ = integrate.quad(
            lambda t: float(_lmf(np.array(t))), 0.0, big_t, points=[4_000.0, 8_000.0]
        )
        assert res.mean_light_fraction[i] == pytest.approx(exact / big_t, rel=2e-3)
    # Spot only: the stationary lamp light (1 here) times the caller's long-run factor.
    assert res.spot_only_mean_light_fraction == pytest.approx(0.95, rel=1e-9)
    clean = cost_per_megalumen_hour(
        [6_000.0],
        curve,
        20.0,
        30.0,
        lamp_watts=0.0,
        tariff_per_kwh=0.0,
        initial_lumens=1_000.0,
        lumen_fraction=lambda t: np.ones_like(np.asarray(t, dtype=float)),
        survival=survival,
    )
    # Same money, less light: the cost per megalumen-hour rises by 1 / mean LMF.
    ratio = clean.mean_light_fraction[0] / res.mean_light_fraction[0]
    assert res.cost_per_mlmh[0] == pytest.approx(clean.cost_per_mlmh[0] * ratio, rel=1e-12)


def test_spot_luminaire_factor_is_checked() -> None:
    curve = weibull_renewal(2.0, 1_000.0, 3_000.0)
    with pytest.raises(ValueError, match="spot_luminaire_factor"):
        cost_per_megalumen_hour(
            [500.0],
            curve,
            1.0,
            2.0,
            lamp_watts=1.0,
            tariff_per_kwh=0.1,
            initial_lumens=100.0,
            lumen_fraction=lambda t: np.ones_like(np.asarray(t, dtype=float)),
            survival=lambda t: np.exp(-((np.asarray(t) / 1_000.0) ** 2)),
            spot_luminaire_factor=0.0,
        )
