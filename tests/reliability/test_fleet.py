"""Checks of service.reliability.fleet against a plain per-lamp loop of the scalar models."""

from __future__ import annotations

import itertools
import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy import stats

from service.reliability.conditions import switching_life_factor, voltage_effect
from service.reliability.fleet import LampTypeSpec, LampTypeTable, evaluate_fleet
from service.reliability.lumen import LumenCurve, default_lumen_curve
from service.reliability.technologies import TECHNOLOGY_DEFAULTS
from service.reliability.weibull import Weibull

SPECS = [
    LampTypeSpec("incandescent", 1_000.0, 120.0),
    LampTypeSpec("halogen", 3_000.0, 230.0, life_exponent=14.5),
    LampTypeSpec("linear_fluorescent", 30_000.0, 277.0, "electronic"),
    LampTypeSpec(
        "linear_fluorescent",
        24_000.0,
        120.0,
        "reactor",
        second_hours_per_start=12.0,
        second_life_ratio=1.3,
    ),
    LampTypeSpec("compact_fluorescent", 10_000.0, 230.0),
    LampTypeSpec("metal_halide", 15_000.0, 277.0, shape=3.2),
    LampTypeSpec("high_pressure_sodium", 24_000.0, 240.0, "regulating"),
    LampTypeSpec("mercury_vapour", 24_000.0, 240.0),
    LampTypeSpec("led", 60_000.0, 277.0, driver_range=(120.0, 300.0)),
    LampTypeSpec(
        "led",
        50_000.0,
        120.0,
        lumen_curve=LumenCurve(
            (0.0, 6_000.0, 50_000.0), (1.0, 0.97, 0.72), "hours", False, "maker data"
        ),
    ),
]


def _random_fleet(n: int, seed: int) -> tuple[np.ndarray, ...]:
    rng = np.random.default_rng(seed)
    idx = rng.integers(0, len(SPECS), n)
    rated = np.array([s.rated_voltage for s in SPECS])[idx]
    age = rng.uniform(0.0, 40_000.0, n)
    volts = rated * rng.uniform(0.85, 1.12, n)
    volts[rng.random(n) < 0.1] = np.nan  # unknown supply: rated voltage
    hps = rng.choice([np.nan, 1.0, 3.0, 8.0, 12.0, 100.0], n)
    horizon = rng.uniform(0.0, 8_000.0, n)
    return idx, age, volts, hps, horizon


def _loop(
    idx: np.ndarray, age: np.ndarray, volts: np.ndarray, hps: np.ndarray, horizon: np.ndarray
) -> dict[str, list[float]]:
    """Plain per-lamp loop over the scalar models (weibull.py, conditions.py, lumen.py)."""
    out: dict[str, list[float]] = {k: [] for k in ("life", "S", "P", "lum", "lum_end", "pow")}
    for i in range(idx.size):
        spec = SPECS[int(idx[i])]
        v = spec.rated_voltage if math.isnan(volts[i]) else float(volts[i])
        eff = voltage_effect(
            v,
            spec.rated_voltage,
            spec.technology,
            spec.ballast,
            life_exponent=spec.life_exponent,
            driver_range=spec.driver_range,
        )
        d = TECHNOLOGY_DEFAULTS[spec.technology]
        sw, _ = switching_life_factor(
            float(hps[i]),
            d.rated_hours_per_start,
            spec.second_hours_per_start,
            spec.second_life_ratio,
        )
        life = eff.life_factor * float(sw)
        shape = d.shape if spec.shape is None else spec.shape
        lamp = Weibull.from_rated_life(spec.rated_life_h, shape).scaled(life)
        curve = spec.lumen_curve or default_lumen_curve(
            spec.technology, None if d.is_filament else spec.rated_life_h
        )
        median = float(lamp.percentile(0.5))
        lh = median if curve.basis == "rated_life_fraction" else None
        out["life"].append(life)
        out["S"].append(float(lamp.sf(age[i])))
        out["P"].append(float(lamp.conditional_failure(age[i], horizon[i])))
        out["lum"].append(float(curve.at(age[i], lh)) * eff.light_factor)
        out["lum_end"].append(float(curve.at(age[i] + horizon[i], lh)) * eff.light_factor)
        out["pow"].append(eff.power_factor)
    return out


def test_fleet_agrees_with_per_lamp_loop() -> None:
    # Reference: a plain Python loop over the scalar models lamp by lamp (weibull.py,
    # conditions.voltage_effect, conditions.switching_life_factor, LumenCurve.at).
    table = LampTypeTable.from_specs(SPECS)
    idx, age, volts, hps, horizon = _random_fleet(400, seed=7)
    res = evaluate_fleet(table, idx, age, volts, hps, horizon)
    ref = _loop(idx, age, volts, hps, horizon)
    np.testing.assert_allclose(res.life_factor, ref["life"], rtol=1e-12)
    np.testing.assert_allclose(res.survival, ref["S"], rtol=1e-10, atol=1e-300)
    np.testing.assert_allclose(res.p_fail_horizon, ref["P"], rtol=1e-10, atol=1e-15)
    np.testing.assert_allclose(res.lumen_fraction, ref["lum"], rtol=1e-12)
    np.testing.assert_allclose(res.lumen_fraction_end, ref["lum_end"], rtol=1e-12)
    np.testing.assert_allclose(res.power_factor, ref["pow"], rtol=1e-12)
    assert res.expected_failures_horizon == pytest.approx(sum(ref["P"]), rel=1e-12)
    # The random fleet must actually exercise the warnings.
    assert res.warn_voltage.any() and not res.warn_voltage.all()
    assert res.warn_switching.any()


def test_fleet_survival_matches_scipy() -> None:
    # scipy.stats.weibull_min with the B50 scale (Abernethy) at rated conditions:
    # at age = rated life, half the lamps survive.
    table = LampTypeTable.from_specs([SPECS[5]])
    n = 5
    res = evaluate_fleet(
        table, np.zeros(n, dtype=int), np.full(n, 15_000.0), 277.0, math.nan, 1_000.0
    )
    ref = stats.weibull_min(c=3.2, scale=15_000.0 / math.log(2.0) ** (1 / 3.2))
    np.testing.assert_allclose(res.survival, ref.sf(15_000.0), rtol=1e-12)
    np.testing.assert_allclose(res.survival, 0.5, rtol=1e-12)
    expected_p = 1.0 - ref.sf(16_000.0) / ref.sf(15_000.0)
    np.testing.assert_allclose(res.p_fail_horizon, expected_p, rtol=1e-10)
    assert res.expected_failures_horizon == pytest.approx(n * expected_p, rel=1e-10)


def test_voltage_shortens_filament_life_in_the_fleet() -> None:
    # Inverse power law (Nelson, Accelerated Testing): at 1.05 x rated, life x 1.05^-16.
    table = LampTypeTable.from_specs(
        [LampTypeSpec("incandescent", 1_000.0, 120.0, life_exponent=16.0)]
    )
    res = evaluate_fleet(
        table, np.array([0, 0]), np.array([0.0, 0.0]), np.array([120.0, 126.0]), math.nan, 0.0
    )
    assert res.life_factor[1] / res.life_factor[0] == pytest.approx(1.05**-16, rel=1e-12)
    np.testing.assert_array_equal(res.p_fail_horizon, [0.0, 0.0])  # empty horizon
    np.testing.assert_array_equal(res.lumen_fraction, res.lumen_fraction_end)


def test_bad_fleet_input_rejected() -> None:
    # Interface contract: out-of-range type indices and negative ages/horizons raise.
    table = LampTypeTable.from_specs(SPECS[:2])
    with pytest.raises(ValueError):
        evaluate_fleet(table, np.array([2]), np.array([0.0]), 120.0, math.nan, 100.0)
    with pytest.raises(ValueError):
        evaluate_fleet(table, np.array([0]), np.array([-1.0]), 120.0, math.nan, 100.0)
    with pytest.raises(ValueError):
        evaluate_fleet(table, np.array([0]), np.array([1.0]), 120.0, math.nan, -100.0)
    with pytest.raises(ValueError):
        LampTypeTable.from_specs([LampTypeSpec("incandescent", 1_000.0, 120.0, "reactor")])


@settings(max_examples=40, deadline=None)
@given(seed=st.integers(0, 2**31 - 1), n=st.integers(1, 60))
def test_fleet_outputs_are_probabilities_and_fractions(seed: int, n: int) -> None:
    # Properties: S and conditional failure are probabilities; light never rises with age.
    table = LampTypeTable.from_specs(SPECS)
    idx, age, volts, hps, horizon = _random_fleet(n, seed)
    res = evaluate_fleet(table, idx, age, volts, hps, horizon)
    assert np.all((res.survival >= 0) & (res.survival <= 1))
    assert np.all((res.p_fail_horizon >= 0) & (res.p_fail_horizon <= 1))
    assert np.all(res.lumen_fraction_end <= res.lumen_fraction + 1e-15)
    assert np.all(res.lumen_fraction_end >= 0)


def test_empty_fleet() -> None:
    # Interface contract: no positions means no expected failures (an empty sum is 0).
    table = LampTypeTable.from_specs(SPECS[:1])
    res = evaluate_fleet(table, np.array([], dtype=int), np.array([]), 120.0, math.nan, 100.0)
    assert res.expected_failures_horizon == 0.0
    assert res.survival.shape == (0,)


@pytest.mark.parametrize("with_history", [False, True])
def test_blocks_change_no_result(with_history: bool) -> None:
    """A fleet longer than one block gives each row what that row gives alone in a short fleet."""
    from service.reliability.exposure import ExposureHistory
    from service.reliability.fleet import BLOCK, FleetResult

    n = 2 * BLOCK + 123  # three blocks, the last one short
    idx, age, volts, hps, horizon = _random_fleet(n, 11)
    rng = np.random.default_rng(5)
    lmf = rng.uniform(0.7, 1.0, n)
    history = None
    if with_history:
        rows = np.sort(rng.integers(0, n, n // 2))
        history = ExposureHistory(
            rows, age[rows] / 3.0, volts[rows] * 1.02, np.full(rows.size, 50.0)
        )
    types = LampTypeTable.from_specs(SPECS)
    whole = evaluate_fleet(
        types, idx, age, volts, hps, horizon, history=history, luminaire_factor=lmf
    )
    # The same rows in pieces that cut across the block boundaries.
    cuts = [0, 777, BLOCK - 1, BLOCK + 5, n]
    for a, b in itertools.pairwise(cuts):
        part_history = None
        if history is not None:
            part_history = history.take(np.arange(a, b), n)
        part = evaluate_fleet(
            types,
            idx[a:b],
            age[a:b],
            volts[a:b],
            hps[a:b],
            horizon[a:b],
            history=part_history,
            luminaire_factor=lmf[a:b],
        )
        for field in FleetResult.__dataclass_fields__:
            if field == "expected_failures_horizon":
                continue
            np.testing.assert_array_equal(getattr(whole, field)[a:b], getattr(part, field))
