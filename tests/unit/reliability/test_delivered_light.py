"""One delivered light shared by many cost sets (service.reliability.megalumen)."""

from __future__ import annotations

import numpy as np
import pytest
from scipy import integrate

from service.reliability.megalumen import (
    cost_per_megalumen_hour,
    cost_per_megalumen_hour_of,
    delivered_light,
)
from service.reliability.renewal import weibull_renewal

ETA_H = 10_000.0  # exponential life: renewal density 1/eta exactly [Cox, Renewal Theory, ch. 4]


def _lumen(u: np.ndarray) -> np.ndarray:
    # Our own straight-line depreciation: 20 % of the light lost over 30,000 h.
    return 1.0 - 0.2 * np.asarray(u, dtype=float) / 30_000.0


def _sf(u: np.ndarray) -> np.ndarray:
    return np.exp(-np.asarray(u, dtype=float) / ETA_H)


def _lmf(t_h: np.ndarray) -> np.ndarray:
    return 1.0 - 0.1 * np.asarray(t_h, dtype=float) / 30_000.0


def test_cumulative_light_is_the_renewal_integral() -> None:
    # Poisson renewals (m = 1/eta): E[light at t] = LMF(t) (S L(t) + ∫_0^t S L(u) du / eta),
    # integrated over (0, T] by scipy.integrate.quad, independent of the core's trapezoid grid.
    curve = weibull_renewal(1.0, ETA_H, 30_000.0)
    light = delivered_light(curve, lumen_fraction=_lumen, survival=_sf, luminaire_factor=_lmf)

    def e_light(t: float) -> float:
        inner, _ = integrate.quad(lambda u: float(_sf(u) * _lumen(u)), 0.0, t)
        return float(_lmf(np.array(t)) * (_sf(np.array(t)) * _lumen(np.array(t)) + inner / ETA_H))

    for big_t in (5_000.0, 12_000.0, 25_000.0):
        exact, _ = integrate.quad(e_light, 0.0, big_t)
        got = float(np.interp(big_t, curve.t, light.cum_light))
        assert got == pytest.approx(exact, rel=2e-3)
    # ∫ S over the grid is the truncated mean life eta (1 - exp(-T/eta)).
    assert light.int_s == pytest.approx(ETA_H * (1 - np.exp(-3.0)), rel=1e-4)


@pytest.mark.parametrize(
    ("c_group", "c_spot", "watts", "tariff", "lumens", "cap"),
    [(20.0, 30.0, 0.0, 0.0, 1_000.0, None), (8.0, 45.0, 58.0, 0.3, 5_200.0, 7_000.0)],
)
def test_shared_light_gives_each_cost_set_its_own_result(
    c_group: float, c_spot: float, watts: float, tariff: float, lumens: float, cap: float | None
) -> None:
    # Oracle: the per-view path, which builds its own light from the same life and curves.
    curve = weibull_renewal(2.5, ETA_H, 30_000.0)
    sf = lambda u: np.exp(-((np.asarray(u, dtype=float) / ETA_H) ** 2.5))  # noqa: E731
    shared = delivered_light(curve, lumen_fraction=_lumen, survival=sf, luminaire_factor=_lmf)
    kw = dict(lamp_watts=watts, tariff_per_kwh=tariff, initial_lumens=lumens, max_interval_h=cap)
    own = cost_per_megalumen_hour(
        [4_000.0, 6_500.0],
        curve,
        c_group,
        c_spot,
        lumen_fraction=_lumen,
        survival=sf,
        luminaire_factor=_lmf,
        spot_luminaire_factor=0.9,
        **kw,  # type: ignore[arg-type]
    )
    got = cost_per_megalumen_hour_of(
        [4_000.0, 6_500.0],
        shared,
        c_group,
        c_spot,
        spot_luminaire_factor=0.9,
        **kw,  # type: ignore[arg-type]
    )
    np.testing.assert_array_equal(got.cost_per_mlmh, own.cost_per_mlmh)
    np.testing.assert_array_equal(got.mean_light_fraction, own.mean_light_fraction)
    np.testing.assert_array_equal(got.grid_cost_per_mlmh, own.grid_cost_per_mlmh)
    assert (got.best_interval_h, got.best_cost_per_mlmh) == (
        own.best_interval_h,
        own.best_cost_per_mlmh,
    )
    assert got.spot_only_cost_per_mlmh == own.spot_only_cost_per_mlmh
    assert (got.limited_interval_h, got.at_limit) == (own.limited_interval_h, own.at_limit)
