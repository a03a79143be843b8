"""Checks of the voltage and switching models in service.reliability.conditions."""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from service.reliability.conditions import (
    supply_fault,
    switching_life_factor,
    voltage_effect,
    voltage_factors,
    voltage_life_factor,
)
from service.reliability.technologies import (
    BALLAST_POWER_GAIN,
    BALLAST_VOLTAGE_BAND,
    BALLASTS,
    TECHNOLOGIES,
    TECHNOLOGY_DEFAULTS,
)


def test_defaults_cover_every_technology_and_ballast() -> None:
    # Tables must be complete: every technology and ballast named in the interface has an entry.
    assert set(TECHNOLOGY_DEFAULTS) == set(TECHNOLOGIES)
    assert set(BALLAST_POWER_GAIN) == set(BALLASTS) == set(BALLAST_VOLTAGE_BAND)
    for d in TECHNOLOGY_DEFAULTS.values():
        assert d.default_ballast in BALLASTS
    # Common practice: mercury in fluorescent and HID; metal halide ruptures.
    assert TECHNOLOGY_DEFAULTS["metal_halide"].rupture_risk
    assert not TECHNOLOGY_DEFAULTS["led"].contains_mercury
    assert TECHNOLOGY_DEFAULTS["compact_fluorescent"].contains_mercury
    # Common practice: fluorescent rated at about 3 h per start, HID at 10 h.
    assert TECHNOLOGY_DEFAULTS["linear_fluorescent"].rated_hours_per_start == 3.0
    assert TECHNOLOGY_DEFAULTS["high_pressure_sodium"].rated_hours_per_start == 10.0


def test_filament_worked_figures_at_95_and_105_percent() -> None:
    # Inverse power law (Nelson, Accelerated Testing), worked figures: life x 0.95^-16 = 2.27,
    # light x 0.95^3.4 = 0.84, life x 1.05^-16 = 0.46, power x V^1.6.
    low = voltage_effect(114.0, 120.0, "incandescent", life_exponent=16.0)
    assert low.life_factor == pytest.approx(0.95**-16, rel=1e-12)
    assert low.life_factor == pytest.approx(2.27, abs=0.005)
    assert low.light_factor == pytest.approx(0.95**3.4, rel=1e-12)
    assert low.light_factor == pytest.approx(0.84, abs=0.005)
    assert low.power_factor == pytest.approx(0.95**1.6, rel=1e-12)
    assert low.warnings == ()
    high = voltage_effect(126.0, 120.0, "incandescent", life_exponent=16.0)
    assert high.life_factor == pytest.approx(0.46, abs=0.005)


def test_incandescent_default_exponent_and_band_warning() -> None:
    # Common practice: life x V^-13 default; results beyond +/-10 % computed but warned.
    eff = voltage_effect(0.95 * 230.0, 230.0, "incandescent")
    assert eff.life_factor == pytest.approx(0.95**-13, rel=1e-12)
    far = voltage_effect(1.12 * 230.0, 230.0, "incandescent")
    assert far.life_factor == pytest.approx(1.12**-13, rel=1e-12)
    assert far.light_factor == pytest.approx(1.12**3.4, rel=1e-12)
    assert len(far.warnings) == 1 and "outside" in far.warnings[0]


def test_halogen_life_gain_held_below_floor() -> None:
    # Common practice: halogen life about V^-14, light about V^3; deep dimming stops the
    # halogen cycle, so the life gain is held at its 90 % value while light keeps falling.
    near = voltage_effect(0.95 * 120.0, 120.0, "halogen")
    assert near.life_factor == pytest.approx(0.95**-14, rel=1e-12)
    deep = voltage_effect(0.80 * 120.0, 120.0, "halogen")
    assert deep.life_factor == pytest.approx(0.90**-14, rel=1e-12)
    assert deep.light_factor == pytest.approx(0.80**3.0, rel=1e-12)
    assert any("halogen cycle" in w for w in deep.warnings)


def test_reactor_and_regulating_ballast_lamp_watts() -> None:
    # Common practice: reactor ballast, +/-5 % line gives about +/-10 % lamp watts;
    # regulating ballast, +/-10 % line gives about +/-5 % lamp watts.
    up = voltage_effect(1.05 * 240.0, 240.0, "high_pressure_sodium", "reactor")
    assert up.power_factor == pytest.approx(1.10, rel=1e-12)
    n = TECHNOLOGY_DEFAULTS["high_pressure_sodium"].life_exponent
    assert up.life_factor == pytest.approx(1.10**-n, rel=1e-12)
    assert up.warnings == ()  # exactly at the reactor band edge
    reg = voltage_effect(0.90 * 277.0, 277.0, "metal_halide", "regulating")
    assert reg.power_factor == pytest.approx(0.95, rel=1e-12)
    # Makers limit reactor types to about +/-5 % (common practice): 7 % low is warned.
    assert voltage_effect(0.93 * 240.0, 240.0, "metal_halide", "reactor").warnings


def test_electronic_ballast_and_led_driver_flat() -> None:
    # Electronic ballasts hold lamp power nearly flat [memory]; LED drivers flat in range
    # (common practice).
    eff = voltage_effect(0.93 * 120.0, 120.0, "linear_fluorescent", "electronic")
    assert (eff.life_factor, eff.light_factor, eff.power_factor) == (1.0, 1.0, 1.0)
    assert eff.warnings == ()
    inside = voltage_effect(120.0, 277.0, "led", driver_range=(100.0, 300.0))
    assert inside.warnings == ()  # 43 % of nominal but inside the stated input range
    outside = voltage_effect(320.0, 277.0, "led", driver_range=(100.0, 300.0))
    assert (outside.life_factor, outside.light_factor, outside.power_factor) == (1.0, 1.0, 1.0)
    assert any("outside driver input range; not extrapolated" in w for w in outside.warnings)


@pytest.mark.parametrize(
    ("args", "kwargs"),
    [
        ((0.0, 120.0, "incandescent"), {}),
        ((-5.0, 120.0, "incandescent"), {}),
        ((120.0, 0.0, "incandescent"), {}),
        ((120.0, 120.0, "plasma"), {}),
        ((120.0, 120.0, "metal_halide", "magic"), {}),
        ((120.0, 120.0, "incandescent", "reactor"), {}),
        ((120.0, 120.0, "metal_halide", "none"), {}),
        ((120.0, 120.0, "metal_halide", "reactor"), {"driver_range": (100.0, 130.0)}),
    ],
)
def test_voltage_effect_rejects_bad_input(args: tuple[object, ...], kwargs: dict) -> None:
    # Interface contract: non-positive volts, unknown names and mismatched ballasts raise.
    with pytest.raises(ValueError):
        voltage_effect(*args, **kwargs)  # type: ignore[arg-type]


_PAIRS = [
    (tech, ballast)
    for tech in TECHNOLOGIES
    for ballast in BALLASTS
    if TECHNOLOGY_DEFAULTS[tech].is_filament == (ballast == "none")
]


@settings(max_examples=150, deadline=None)
@given(
    cases=st.lists(
        st.tuples(st.sampled_from(_PAIRS), st.floats(0.5, 1.5), st.floats(100.0, 480.0)),
        min_size=1,
        max_size=25,
    )
)
def test_vectorised_model_agrees_with_scalar(
    cases: list[tuple[tuple[str, str], float, float]],
) -> None:
    # Interface contract: voltage_factors over a mixed fleet equals voltage_effect lamp by lamp.
    ratios, n, k, m, g, fil, band, floor = ([] for _ in range(8))
    expected = []
    for (tech, ballast), ratio, rated in cases:
        d = TECHNOLOGY_DEFAULTS[tech]
        eff = voltage_effect(ratio * rated, rated, tech, ballast)
        expected.append((eff.life_factor, eff.light_factor, eff.power_factor, bool(eff.warnings)))
        ratios.append(ratio * rated / rated)
        n.append(d.life_exponent)
        k.append(d.light_exponent)
        m.append(d.power_exponent)
        g.append(BALLAST_POWER_GAIN[ballast])
        fil.append(d.is_filament)
        band.append(BALLAST_VOLTAGE_BAND[ballast])
        floor.append(math.nan if d.life_ratio_floor is None else d.life_ratio_floor)
    life, light, power, out = voltage_factors(
        np.array(ratios), n, k, m, g, fil, band=band, life_ratio_floor=floor
    )
    exp = np.array(expected, dtype=float)
    np.testing.assert_array_equal(life, exp[:, 0])
    np.testing.assert_array_equal(light, exp[:, 1])
    np.testing.assert_array_equal(power, exp[:, 2])
    np.testing.assert_array_equal(out, exp[:, 3].astype(bool))


def test_vectorised_discharge_formula() -> None:
    # Module's stated model: P = 1 + g (r - 1); life x P^-n; light x P^k; power = P.
    r = np.array([0.9, 1.0, 1.04])
    life, light, power, out = voltage_factors(r, 3.0, 1.2, 9.9, 2.0, False, band=0.05)
    p = 1.0 + 2.0 * (r - 1.0)
    np.testing.assert_allclose(power, p, rtol=1e-15)
    # below rated voltage no life credit (capped at 1, common practice: a supply fault)
    np.testing.assert_allclose(life, np.minimum(p**-3.0, 1.0), rtol=1e-15)
    assert life[0] == 1.0
    np.testing.assert_allclose(light, p**1.2, rtol=1e-15)
    np.testing.assert_array_equal(out, [True, False, False])
    with pytest.raises(ValueError):
        voltage_factors(np.array([1.0, 0.0]), 3.0, 1.0, 1.0, 2.0, False)


def test_switching_default_slope_common_practice() -> None:
    # Common practice: about +25 % life at 12 h per start vs the 3 h rated cycle.
    f, warn = switching_life_factor(np.array([3.0, 12.0, math.nan]), 3.0)
    np.testing.assert_allclose(f, [1.0, 1.25, 1.0], rtol=1e-12)
    assert not warn.any()


def test_switching_interpolates_in_log_hours() -> None:
    # Common practice: linear in ln(hours per start) between the two quoted points.
    f, warn = switching_life_factor(np.array([3.0, 6.0, 12.0]), 3.0, 12.0, 1.30)
    # 6 h/start lies halfway between 3 and 12 in ln: factor 1 + 0.30/2.
    np.testing.assert_allclose(f, [1.0, 1.15, 1.30], rtol=1e-12)
    assert not warn.any()


def test_switching_extrapolation_bounded_and_flagged() -> None:
    # Common practice: bound the extrapolation; bounded values are flagged.
    f, warn = switching_life_factor(np.array([0.01, 1_000.0, math.inf]), 3.0, 12.0, 1.30)
    np.testing.assert_allclose(f, [0.5, 1.5, 1.5])
    np.testing.assert_array_equal(warn, [True, True, True])
    # No rated cycle (filament, LED): no switching effect at all.
    f2, warn2 = switching_life_factor(np.array([0.1, 50.0]), None)
    np.testing.assert_array_equal(f2, [1.0, 1.0])
    assert not warn2.any()
    f3, _ = switching_life_factor(np.array([0.1, 50.0]), np.array([math.nan, math.nan]))
    np.testing.assert_array_equal(f3, [1.0, 1.0])


def test_switching_rejects_bad_input() -> None:
    # Interface contract: non-positive hours, half-given or degenerate second points raise.
    with pytest.raises(ValueError):
        switching_life_factor(0.0, 3.0)
    with pytest.raises(ValueError):
        switching_life_factor(5.0, 3.0, 12.0, None)
    with pytest.raises(ValueError):
        switching_life_factor(5.0, 3.0, 3.0, 1.2)
    with pytest.raises(ValueError):
        switching_life_factor(5.0, 3.0, 12.0, -1.0)


@settings(max_examples=60, deadline=None)
@given(
    hps=st.lists(st.floats(0.05, 5_000.0), min_size=2, max_size=20),
    ratio=st.floats(1.0, 1.6),
)
def test_switching_monotone_and_bounded(hps: list[float], ratio: float) -> None:
    # Property: longer cycles never shorten life when the quoted 12 h life is >= the 3 h life,
    # and the factor stays inside [min_factor, max_factor].
    h = np.sort(np.array(hps))
    f, _ = switching_life_factor(h, 3.0, 12.0, ratio)
    assert np.all(np.diff(f) >= -1e-15)
    assert np.all((f >= 0.5) & (f <= 1.5))


def test_reactor_under_voltage_is_a_supply_fault_without_life_credit() -> None:
    # Common practice: HID below its ballast's band is a supply fault
    # (poor starting, electrode wear, colour shift), not extra life. 250 V on a 277 V metal
    # halide reactor circuit: the old model gave life x 1.92, now 1.0 with a warning.
    eff = voltage_effect(250.0, 277.0, "metal_halide", "reactor")
    assert eff.life_factor == 1.0
    assert any(w.startswith("supply fault") for w in eff.warnings)
    p = 1.0 + 2.0 * (250.0 / 277.0 - 1.0)
    assert eff.light_factor < 1.0 and eff.power_factor == pytest.approx(p, rel=1e-12)
    # 3 % low on a reactor: inside the band, no fault, still no credit.
    near = voltage_effect(0.97 * 277.0, 277.0, "metal_halide", "reactor")
    assert near.life_factor == 1.0 and near.warnings == ()
    # over-voltage shortens life as before
    assert voltage_effect(1.04 * 277.0, 277.0, "metal_halide", "reactor").life_factor < 1.0
    # an electronic ballast holds lamp power: no fault at the same supply
    assert voltage_effect(250.0, 277.0, "metal_halide", "electronic").warnings == ()
    flags = supply_fault(
        np.array([0.90, 0.97, 0.85]),
        np.array([2.0, 2.0, np.nan]),
        np.array([False, False, True]),
        band=0.05,
    )
    np.testing.assert_array_equal(flags, [True, False, False])


def test_life_factor_alone_matches_the_full_model() -> None:
    # Internal consistency: the exposure segments' life factor is voltage_factors' life.
    rng = np.random.default_rng(1)
    r = rng.uniform(0.8, 1.2, 200)
    gain = rng.choice([np.nan, 0.0, 0.5, 2.0], 200)
    fil = np.isnan(gain)
    n = rng.uniform(1.0, 16.0, 200)
    floor = np.where(rng.random(200) < 0.3, 0.9, np.nan)
    dmin = np.where(rng.random(200) < 0.3, 0.85, np.nan)
    dmax = np.where(np.isnan(dmin), np.nan, 1.1)
    full, _, _, _ = voltage_factors(
        r,
        n,
        3.4,
        1.6,
        gain,
        fil,
        life_ratio_floor=floor,
        driver_min_ratio=dmin,
        driver_max_ratio=dmax,
    )
    alone = voltage_life_factor(
        r, n, gain, fil, life_ratio_floor=floor, driver_min_ratio=dmin, driver_max_ratio=dmax
    )
    np.testing.assert_array_equal(alone, full)
