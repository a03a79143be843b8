"""Checks of cumulative voltage exposure (service.reliability.exposure and fleet history)."""

from __future__ import annotations

import numpy as np
import pytest
from scipy import integrate, stats

from service.reliability.conditions import voltage_effect
from service.reliability.exposure import (
    ExposureHistory,
    accumulated_exposure,
    equivalent_life_factor,
)
from service.reliability.fleet import LampTypeSpec, LampTypeTable, evaluate_fleet
from service.reliability.weibull import scale_from_rated_life

INC = LampTypeSpec("incandescent", 1_000.0, 120.0)  # life x V^-13 (technology default)


def test_worked_case_half_low_half_high() -> None:
    # Worked cumulative-damage case (Nelson, *Accelerated Testing*, cumulative exposure;
    # figures computed by hand): half the hours at 0.95, half at 1.05 of rated voltage,
    # life x r^-13 gives 1 / (0.5 * 0.95^13 + 0.5 * 1.05^13) = 0.8335, the mean voltage 1.000.
    f = equivalent_life_factor([500.0, 500.0], [0.95**-13, 1.05**-13])
    assert f == pytest.approx(1.0 / (0.5 * 0.95**13 + 0.5 * 1.05**13), rel=1e-12)
    assert round(f, 3) == 0.834


def test_against_a_numerical_integral() -> None:
    # Direct numerical integral (scipy.integrate.quad) of the damage rate r(t)^13 for a supply
    # swinging +/-6 % sinusoidally over 1,000 h, against the sum over 1,000 one-hour segments.
    def ratio(t: float) -> float:
        return 1.0 + 0.06 * np.sin(2 * np.pi * t / 250.0)

    exact, _ = integrate.quad(lambda t: ratio(t) ** 13, 0.0, 1_000.0, limit=200)
    mid = np.arange(1_000) + 0.5
    v = 120.0 * np.array([ratio(t) for t in mid])
    table = LampTypeTable.from_specs([INC])
    hist = ExposureHistory(np.zeros(1_000, np.intp), np.ones(1_000), v)
    res = evaluate_fleet(table, np.array([0]), 1_000.0, 120.0, np.nan, 0.0, history=hist)
    assert res.rated_age_h[0] == pytest.approx(exact, rel=1e-4)
    # the mean voltage (1.0 x rated) would give 1,000 h: the convex law makes wear larger
    assert exact > 1_000.0 * 1.01


def test_constant_supply_history_matches_no_history() -> None:
    # Internal consistency: a history at today's voltage is the plain AFT model.
    table = LampTypeTable.from_specs([INC, LampTypeSpec("metal_halide", 15_000.0, 277.0)])
    k = np.array([0, 1, 1])
    age = np.array([600.0, 8_000.0, 0.0])
    volts = np.array([126.0, 270.0, 280.0])
    hist = ExposureHistory(np.array([0, 0, 1]), np.array([200.0, 400.0, 8_000.0]), volts[[0, 0, 1]])
    a = evaluate_fleet(table, k, age, volts, np.nan, 500.0)
    b = evaluate_fleet(table, k, age, volts, np.nan, 500.0, history=hist)
    np.testing.assert_allclose(b.survival, a.survival, rtol=1e-12)
    np.testing.assert_allclose(b.p_fail_horizon, a.p_fail_horizon, rtol=1e-12)
    np.testing.assert_allclose(b.rated_age_h, a.rated_age_h, rtol=1e-12)


def test_survival_from_rated_age_against_scipy() -> None:
    # scipy.stats.weibull_min at the accumulated rated-condition age: 300 h at 0.95 and 300 h
    # at 1.05 x rated, then a 200 h horizon at 1.05.
    table = LampTypeTable.from_specs([INC])
    hist = ExposureHistory(np.array([0, 0]), np.array([300.0, 300.0]), np.array([114.0, 126.0]))
    res = evaluate_fleet(table, np.array([0]), 600.0, 126.0, np.nan, 200.0, history=hist)
    f_lo, f_hi = 0.95**-13, 1.05**-13
    a_r = 300.0 / f_lo + 300.0 / f_hi
    beta = 3.5  # incandescent default shape
    eta = float(scale_from_rated_life(1_000.0, beta, 50.0))
    dist = stats.weibull_min(beta, scale=eta)
    assert res.rated_age_h[0] == pytest.approx(a_r, rel=1e-12)
    assert res.survival[0] == pytest.approx(dist.sf(a_r), rel=1e-10)
    want = 1.0 - dist.sf(a_r + 200.0 / f_hi) / dist.sf(a_r)
    assert res.p_fail_horizon[0] == pytest.approx(want, rel=1e-10)


def test_uncovered_hours_at_todays_supply() -> None:
    # Hours not in the history burn at today's voltage (the documented precedence's result).
    table = LampTypeTable.from_specs([INC])
    hist = ExposureHistory(np.array([0]), np.array([100.0]), np.array([114.0]))
    res = evaluate_fleet(table, np.array([0]), 400.0, 126.0, np.nan, 0.0, history=hist)
    assert res.rated_age_h[0] == pytest.approx(100.0 / 0.95**-13 + 300.0 / 1.05**-13)


def test_accumulated_exposure_and_take() -> None:
    got = accumulated_exposure([0, 2, 2], [10.0, 4.0, 6.0], [2.0, 0.5, 1.0], 3)
    np.testing.assert_allclose(got, [5.0, 0.0, 14.0])
    hist = ExposureHistory(np.array([0, 2, 2]), np.array([10.0, 4.0, 6.0]), np.full(3, 120.0))
    sub = hist.take(np.array([False, True, True]), 3)
    np.testing.assert_array_equal(sub.position, [1, 1])
    with pytest.raises(ValueError, match="life factors"):
        accumulated_exposure([0], [1.0], [0.0], 1)
    with pytest.raises(ValueError, match="hours"):
        ExposureHistory(np.array([0]), np.array([-1.0]), np.array([120.0]))


def test_segments_follow_the_scalar_voltage_model_for_every_rule() -> None:
    # Each segment's wear is dt / voltage_effect(...).life_factor, the scalar model (itself
    # checked against the power laws in test_conditions): halogen below its floor, an LED
    # outside its driver range, an HID lamp under-powered on a reactor.
    specs = [
        LampTypeSpec("halogen", 3_000.0, 230.0),
        LampTypeSpec("led", 50_000.0, 230.0, driver_range=(200.0, 250.0)),
        LampTypeSpec("high_pressure_sodium", 24_000.0, 277.0),
        INC,
    ]
    table = LampTypeTable.from_specs(specs)
    cases = [  # (row, volts)
        (0, 190.0),
        (0, 240.0),
        (1, 180.0),
        (1, 235.0),
        (2, 250.0),
        (2, 285.0),
        (3, 126.0),
    ]
    rows = np.array([c[0] for c in cases])
    volts = np.array([c[1] for c in cases])
    hist = ExposureHistory(rows, np.full(rows.size, 100.0), volts)
    k = np.arange(4)
    res = evaluate_fleet(table, k, [200.0, 200.0, 200.0, 100.0], np.nan, np.nan, 0.0, history=hist)
    want = np.zeros(4)
    for row, v in cases:
        s = specs[row]
        eff = voltage_effect(v, s.rated_voltage, s.technology, driver_range=s.driver_range)
        want[row] += 100.0 / eff.life_factor
    np.testing.assert_allclose(res.rated_age_h, want, rtol=1e-12)


def test_switching_accumulates_per_interval_against_a_numerical_integral() -> None:
    # Direct numerical integral (scipy.integrate.quad) of the wear rate 1 / (f_V(t) f_sw(t))
    # for a linear fluorescent lamp on a reactor ballast (lamp power 1 + 2 (r - 1), life x
    # P^-2; the switching factor linear in ln(hours per start) through (3 h, 1.0) and
    # (12 h, 1.25), the makers' two quoted cycles: common practice), whose supply swings
    # 0-4 % above rated and whose burn hours per start drift from 1.5 h to 12 h over 2,000 h.
    # The formulas are written out here, independent of conditions.py.
    spec = LampTypeSpec(
        "linear_fluorescent",
        24_000.0,
        277.0,
        ballast="reactor",
        second_hours_per_start=12.0,
        second_life_ratio=1.25,
    )

    def ratio(t: float) -> float:
        return 1.0 + 0.04 * np.sin(np.pi * t / 500.0) ** 2

    def hps(t: float) -> float:
        return 1.5 * 8.0 ** (t / 2_000.0)

    def rate(t: float) -> float:
        f_v = (1.0 + 2.0 * (ratio(t) - 1.0)) ** -2.0
        f_sw = 1.0 + 0.25 * np.log(hps(t) / 3.0) / np.log(4.0)
        return 1.0 / (f_v * f_sw)

    exact, _ = integrate.quad(rate, 0.0, 2_000.0, limit=400)
    n = 2_000
    mid = np.arange(n) + 0.5
    v = 277.0 * np.array([ratio(t) for t in mid])
    starts = np.array([1.0 / hps(t) for t in mid])  # one burn hour per segment
    hist = ExposureHistory(np.zeros(n, np.intp), np.ones(n), v, starts)
    table = LampTypeTable.from_specs([spec])
    # The position's cycle is the lamp's mean (hours / starts, about 3.6 h per start): the
    # shortcut the issue retires; with segment starts only the segments' own cycles count.
    mean_hps = float(n / starts.sum())
    res = evaluate_fleet(table, np.array([0]), 2_000.0, 277.0, mean_hps, 0.0, history=hist)
    assert res.rated_age_h[0] == pytest.approx(exact, rel=1e-4)
    # With the mean cycle for every segment (no starts) the answer differs measurably.
    mean_only = ExposureHistory(np.zeros(n, np.intp), np.ones(n), v)
    res_mean = evaluate_fleet(
        table, np.array([0]), 2_000.0, 277.0, mean_hps, 0.0, history=mean_only
    )
    # the lamp's mean cycle misstates the wear of a drifting cycle (by about 2 % here)
    assert abs(res_mean.rated_age_h[0] - exact) > 0.015 * exact


def test_segment_starts_are_kept_by_take_and_drop() -> None:
    hist = ExposureHistory(
        np.array([0, 1, 2]),
        np.array([10.0, 4.0, 6.0]),
        np.full(3, 120.0),
        np.array([5.0, np.nan, 2.0]),
    )
    sub = hist.take(np.array([False, True, True]), 3)
    assert sub.position.tolist() == [0, 1]
    assert sub.segment_hours_per_start()[1] == pytest.approx(3.0)
    assert np.isnan(sub.segment_hours_per_start()[0])
    dropped = hist.drop_rows(np.array([True, False, False]))
    assert dropped.starts[1] == 2.0
    with pytest.raises(ValueError, match="starts"):
        ExposureHistory(np.array([0]), np.array([1.0]), np.array([120.0]), np.array([-1.0]))


def test_segment_switching_follows_the_scalar_switching_model() -> None:
    # Internal consistency: each one-segment history gives the wear of the plain model at
    # that segment's hours per start (conditions.switching_life_factor via evaluate_fleet),
    # for a type with a second quoted cycle, one on the default slope, one with none.
    specs = [
        LampTypeSpec(
            "linear_fluorescent",
            24_000.0,
            277.0,
            second_hours_per_start=12.0,
            second_life_ratio=1.3,
        ),
        LampTypeSpec("compact_fluorescent", 10_000.0, 120.0),
        INC,
    ]
    table = LampTypeTable.from_specs(specs)
    rng = np.random.default_rng(7)
    n = 300
    k = np.repeat(np.arange(3), n // 3)
    hps = rng.uniform(0.2, 80.0, n)  # reaches both clip bounds
    hours = rng.uniform(10.0, 500.0, n)
    volts = table.rated_voltage[k] * rng.uniform(0.97, 1.03, n)
    hist = ExposureHistory(np.arange(n), hours, volts, hours / hps)
    got = evaluate_fleet(table, k, hours, volts, np.nan, 0.0, history=hist).rated_age_h
    plain = evaluate_fleet(table, k, hours, volts, hps, 0.0).rated_age_h
    np.testing.assert_allclose(got, plain, rtol=1e-12)
