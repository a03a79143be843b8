"""Operating conditions: supply voltage and switching cycle as life, light and power factors.

Formulas and sources:

- Filament lamps (incandescent, halogen), r = V / V_rated [practice; the inverse power law
  of accelerated life testing, Nelson, *Accelerated Testing*]:
      life  x r^-n        (n about 13-16)
      light x r^3.4       (halogen about r^3.0)
      power x r^1.6
  The relations hold only within several percent of rated voltage: results beyond the
  technology's band (10 % for filament lamps) are still computed but warned.
  Halogen: deep dimming stops the halogen cycle [practice], so the life gain is not extended
  below HALOGEN_LIFE_RATIO_FLOOR x rated voltage (the factor is held at its value there).
- Discharge lamps: the ballast sets lamp power. Lamp power ratio
      P = 1 + g (r - 1),  clipped to at least MIN_POWER_RATIO,
  with g = BALLAST_POWER_GAIN[ballast] (reactor about 2: +/-5 % line gives about +/-10 %
  lamp watts [practice]; regulating about 0.5 [practice]; electronic and LED driver 0,
  i.e. flat [memory]/[practice]). ASSUMPTION of this module (no single source): life and
  light follow lamp power by power laws, life x P^-n_life and light x P^light_exponent, with
  the technology's exponents. Power factor is P itself.
- Discharge lamps below rated voltage get no life credit: the life factor is capped at 1.0
  for r < 1 (under-powered arc tubes and cathodes start poorly, wear their electrodes and
  shift colour [practice]); below the ballast's band (reactor 5 %, regulating 10 %) the
  position carries a supply-fault warning (supply_fault), to fix at the supply or ballast
  tap. Over-voltage shortens life as above.
- LED drivers hold output flat inside their input range [practice]; outside it the fixture
  is flagged and nothing is extrapolated (all factors 1.0).
- Switching [practice]: fluorescent rated life is quoted at about 3 burn hours per start;
  makers also publish life at 12 h per start, often 20-30 % more. The life multiplier is
  interpolated linearly in ln(hours per start) between (rated h/start, 1.0) and
  (second h/start, second life ratio), and extrapolation is bounded and flagged. Without a
  second point the default slope gives +25 % at 12 h vs 3 h per start.

The per-technology exponents, ballast gains and bands are in technologies.py.

Voltages are volts, times are burn hours. Labels: [published] a named source, [practice] a
rule of the trade, [memory] recalled and only a default a user can override.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike

from service.reliability.arrays import BoolArray, FloatArray
from service.reliability.technologies import (
    BALLAST_POWER_GAIN,
    BALLAST_VOLTAGE_BAND,
    BALLASTS,
    DEFAULT_SWITCHING_SLOPE,
    TECHNOLOGIES,
    TECHNOLOGY_DEFAULTS,
    TechnologyDefaults,
)

# Lamp power ratio never goes below this (keeps P^-n finite far outside any valid band).
MIN_POWER_RATIO: float = 0.05

# Tolerance when comparing a voltage deviation with its band (floating-point noise only).
_BAND_TOL = 1e-9


@dataclass(frozen=True)
class VoltageEffect:
    """Life, light and power multipliers at an operating voltage, with any warnings."""

    life_factor: float
    light_factor: float
    power_factor: float
    warnings: tuple[str, ...]


def _arr(x: ArrayLike) -> FloatArray:
    return np.asarray(x, dtype=np.float64)


def _opt(x: ArrayLike | None) -> FloatArray:
    """None becomes NaN (meaning "not given")."""
    return np.asarray(math.nan if x is None else x, dtype=np.float64)


def voltage_factors(
    voltage_ratio: ArrayLike,
    life_exponent: ArrayLike,
    light_exponent: ArrayLike,
    power_exponent: ArrayLike,
    ballast_gain: ArrayLike,
    is_filament: ArrayLike,
    *,
    band: ArrayLike = 0.10,
    life_ratio_floor: ArrayLike = math.nan,
    driver_min_ratio: ArrayLike = math.nan,
    driver_max_ratio: ArrayLike = math.nan,
) -> tuple[FloatArray, FloatArray, FloatArray, BoolArray]:
    """Vectorised voltage model: (life, light, power, out_of_band) for voltage ratios V/V_rated.

    ballast_gain NaN or is_filament True selects the filament power laws. life_ratio_floor
    (NaN = none) holds the filament life gain below that ratio (halogen). driver_min_ratio /
    driver_max_ratio (NaN = not given) replace the band check: outside them all factors are
    1.0 (not extrapolated) and the position is flagged.
    """
    r = _arr(voltage_ratio)
    if np.any(~(r > 0)):
        raise ValueError("voltage ratio must be a positive number (volts > 0)")
    gain = _arr(ballast_gain)
    filament = np.asarray(is_filament, dtype=bool) | np.isnan(gain)
    return voltage_factors_of(
        r,
        _arr(life_exponent),
        _arr(light_exponent),
        _arr(power_exponent),
        np.where(filament, 0.0, gain),
        filament,
        band=_arr(band),
        life_ratio_floor=_arr(life_ratio_floor),
        driver_min_ratio=_arr(driver_min_ratio),
        driver_max_ratio=_arr(driver_max_ratio),
    )


def voltage_factors_of(
    r: FloatArray,
    n_life: FloatArray,
    k_light: FloatArray,
    m_power: FloatArray,
    gain: FloatArray,
    filament: BoolArray,
    *,
    band: FloatArray,
    life_ratio_floor: FloatArray | None,
    driver_min_ratio: FloatArray | None,
    driver_max_ratio: FloatArray | None,
    has_driver_range: BoolArray | None = None,
) -> tuple[FloatArray, FloatArray, FloatArray, BoolArray]:
    """voltage_factors on checked arrays: gain 0 and filament True for filament lamps.

    A fleet gathers the per-type columns once and passes None for a rule no type has (no
    halogen floor, no driver range): the same results without that rule's work.
    has_driver_range: where either bound is given (computed from them when None).
    """
    # Ballasted lamps: lamp power ratio P from the line-voltage ratio through the ballast gain.
    dr = r - 1.0
    p_lamp = np.maximum(1.0 + gain * dr, MIN_POWER_RATIO)
    base = np.where(filament, r, p_lamp)
    floor = life_ratio_floor
    life = _life(r, p_lamp, n_life, filament, floor, base)
    light = np.power(base, k_light)
    power = np.where(filament, np.power(base, m_power), p_lamp)

    out_band = np.abs(dr) > band + _BAND_TOL
    if driver_min_ratio is not None and driver_max_ratio is not None:
        has_range = has_driver_range
        if has_range is None:
            has_range = ~np.isnan(driver_min_ratio) | ~np.isnan(driver_max_ratio)
        outside_range = (r < driver_min_ratio) | (r > driver_max_ratio)  # NaN compares False
        if outside_range.any():
            life = np.where(outside_range, 1.0, life)
            light = np.where(outside_range, 1.0, light)
            power = np.where(outside_range, 1.0, power)
        out_band = np.where(has_range, outside_range, out_band)
    if floor is not None:
        out_band |= filament & (r < floor)
    return life, light, power, np.asarray(out_band, dtype=bool)


def _life(
    r: FloatArray,
    p_lamp: FloatArray,
    n_life: FloatArray,
    filament: BoolArray,
    floor: FloatArray | None,
    base: FloatArray | None = None,
) -> FloatArray:
    """Life factor before the driver-range rule: filament r^-n, discharge P^-n capped at 1.

    base: where(filament, r, p_lamp) when the caller has it (the life base without a floor).
    """
    # Halogen: life gain frozen below the floor ratio (fmax ignores a NaN floor; None = none).
    if floor is None:
        life_base = np.where(filament, r, p_lamp) if base is None else base
    else:
        life_base = np.where(filament, np.fmax(r, floor), p_lamp)
    life = np.power(life_base, -n_life)
    # Under-powered discharge lamps: no life credit (a supply fault, not a bonus).
    return np.asarray(np.minimum(life, 1.0, out=life, where=~filament & (r < 1.0)))


def voltage_life_factor(
    voltage_ratio: ArrayLike,
    life_exponent: ArrayLike,
    ballast_gain: ArrayLike,
    is_filament: ArrayLike,
    *,
    life_ratio_floor: ArrayLike = math.nan,
    driver_min_ratio: ArrayLike = math.nan,
    driver_max_ratio: ArrayLike = math.nan,
) -> FloatArray:
    """The life factor of voltage_factors alone (same formulas; for exposure segments)."""
    r = _arr(voltage_ratio)
    gain = _arr(ballast_gain)
    filament = np.asarray(is_filament, dtype=bool) | np.isnan(gain)
    p_lamp = np.maximum(1.0 + np.where(filament, 0.0, gain) * (r - 1.0), MIN_POWER_RATIO)
    life = _life(r, p_lamp, _arr(life_exponent), filament, _arr(life_ratio_floor))
    outside = (r < _arr(driver_min_ratio)) | (r > _arr(driver_max_ratio))
    return np.asarray(np.where(outside, 1.0, life), dtype=np.float64)


def _fault_text(voltage: float, pct: float, ballast: str) -> str:
    """The supply-fault warning of one position."""
    return (
        f"supply fault: {voltage:g} V is {-pct:.1f}% below rated on a {ballast} ballast; "
        "an under-powered discharge lamp starts poorly, wears its electrodes and shifts "
        "colour: no life credit taken; check the supply or the ballast tap"
    )


def supply_fault(
    voltage_ratio: ArrayLike,
    ballast_gain: ArrayLike,
    is_filament: ArrayLike,
    *,
    band: ArrayLike = 0.10,
) -> BoolArray:
    """Discharge lamps on a ballast that passes line changes through, below its band."""
    r = _arr(voltage_ratio)
    gain = _arr(ballast_gain)
    discharge = ~np.asarray(is_filament, dtype=bool) & ~np.isnan(gain) & (gain > 0)
    return np.asarray(discharge & (r < 1.0 - _arr(band) - _BAND_TOL), dtype=bool)


def _checked_ballast(technology: str, ballast: str | None) -> tuple[TechnologyDefaults, str]:
    """The technology's defaults and the ballast (its default if None), both checked."""
    if technology not in TECHNOLOGY_DEFAULTS:
        raise ValueError(f"unknown technology {technology!r}; expected one of {TECHNOLOGIES}")
    d = TECHNOLOGY_DEFAULTS[technology]
    ballast = d.default_ballast if ballast is None else ballast
    if ballast not in BALLAST_POWER_GAIN:
        raise ValueError(f"unknown ballast {ballast!r}; expected one of {BALLASTS}")
    if d.is_filament != (ballast == "none"):
        raise ValueError(
            f"ballast {ballast!r} does not fit {technology}: "
            "'none' is for filament lamps only, and filament lamps take no ballast"
        )
    return d, ballast


def _driver_ratios(
    ballast: str, rated_voltage: float, driver_range: tuple[float, float] | None
) -> tuple[float, float]:
    """The driver's input range as fractions of rated voltage (NaN, NaN without one)."""
    if driver_range is None:
        return math.nan, math.nan
    if ballast not in ("led_driver", "electronic"):
        raise ValueError("driver_range applies only to an LED driver or electronic ballast")
    vmin, vmax = driver_range
    if not (0 < vmin < vmax):
        raise ValueError("driver_range must be (vmin, vmax) volts with 0 < vmin < vmax")
    return vmin / rated_voltage, vmax / rated_voltage


def _one(v: float) -> FloatArray:
    # One-element arrays take the same numpy code path as a fleet (numpy special-cases some
    # scalar exponents), so scalar and vectorised results agree exactly.
    return np.array([v], dtype=np.float64)


@dataclass(frozen=True, kw_only=True)
class _Case:
    """One voltage_effect call's resolved inputs, for its warnings."""

    voltage: float
    ratio: float  # operating / rated voltage
    ballast: str
    is_filament: bool
    gain: float
    band: float
    floor: float  # filament life-ratio floor (NaN where none)
    driver_range: tuple[float, float] | None
    outside_driver: bool


def _voltage_warnings(c: _Case) -> tuple[str, ...]:
    """Warnings for one case: outside the driver range or the trusted band, supply fault."""
    warnings: list[str] = []
    pct = (c.ratio - 1.0) * 100.0
    if c.driver_range is not None:
        if c.outside_driver:
            warnings.append(
                "outside driver input range; not extrapolated "
                f"({c.voltage:g} V vs {c.driver_range[0]:g}-{c.driver_range[1]:g} V)"
            )
    elif abs(c.ratio - 1.0) > c.band + _BAND_TOL:
        kind = "filament power laws" if c.is_filament else f"{c.ballast} ballast"
        warnings.append(
            f"supply is {pct:+.1f}% from rated voltage, outside the +/-{c.band * 100:g}% band "
            f"for {kind}; figures are extrapolated"
        )
    filament = np.array([c.is_filament])
    if bool(supply_fault(_one(c.ratio), _one(c.gain), filament, band=_one(c.band))[0]):
        warnings.append(_fault_text(c.voltage, pct, c.ballast))
    if c.is_filament and not math.isnan(c.floor) and c.ratio < c.floor:
        warnings.append(
            f"below {c.floor * 100:g}% of rated voltage the halogen cycle stops; "
            f"life gain held at its {c.floor * 100:g}% value"
        )
    return tuple(warnings)


@dataclass(frozen=True)
class VoltageModel:
    """One lamp type's voltage-response parameters, resolved against its technology."""

    ballast: str
    is_filament: bool
    life_exponent: float
    light_exponent: float
    power_exponent: float
    ballast_gain: float
    band: float  # fraction of rated voltage
    life_ratio_floor: float  # NaN = none
    driver_min_ratio: float  # NaN = not given
    driver_max_ratio: float

    def factors(self, ratio: FloatArray) -> tuple[FloatArray, FloatArray, FloatArray, BoolArray]:
        """voltage_factors at these voltage ratios, as voltage_effect calls it per value."""

        def full(v: float) -> FloatArray:
            return np.full(ratio.shape, v, dtype=np.float64)

        return voltage_factors(
            ratio,
            full(self.life_exponent),
            full(self.light_exponent),
            full(self.power_exponent),
            full(self.ballast_gain),
            np.full(ratio.shape, self.is_filament),
            band=full(self.band),
            life_ratio_floor=full(self.life_ratio_floor),
            driver_min_ratio=full(self.driver_min_ratio),
            driver_max_ratio=full(self.driver_max_ratio),
        )


def voltage_model(
    rated_voltage: float,
    technology: str,
    ballast: str | None = None,
    *,
    life_exponent: float | None = None,
    light_exponent: float | None = None,
    power_exponent: float | None = None,
    driver_range: tuple[float, float] | None = None,
) -> VoltageModel:
    """The checked parameters voltage_effect uses (technology defaults where not given)."""
    d, ballast = _checked_ballast(technology, ballast)
    if not (math.isfinite(rated_voltage) and rated_voltage > 0):
        raise ValueError("rated voltage must be a positive number of volts")
    dmin, dmax = _driver_ratios(ballast, rated_voltage, driver_range)
    return VoltageModel(
        ballast=ballast,
        is_filament=d.is_filament,
        life_exponent=d.life_exponent if life_exponent is None else life_exponent,
        light_exponent=d.light_exponent if light_exponent is None else light_exponent,
        power_exponent=d.power_exponent if power_exponent is None else power_exponent,
        ballast_gain=BALLAST_POWER_GAIN[ballast],
        band=BALLAST_VOLTAGE_BAND[ballast],
        life_ratio_floor=d.life_ratio_floor if d.life_ratio_floor is not None else math.nan,
        driver_min_ratio=dmin,
        driver_max_ratio=dmax,
    )


def needs_words(vm: VoltageModel, ratio: FloatArray, out: BoolArray) -> BoolArray:
    """Where voltage_effect would word a warning: out of band or range, supply fault, floor."""
    fault = supply_fault(
        ratio,
        np.full(ratio.shape, vm.ballast_gain),
        np.full(ratio.shape, vm.is_filament),
        band=np.full(ratio.shape, vm.band),
    )
    wide = np.abs(ratio - 1.0) > vm.band + _BAND_TOL
    low = vm.is_filament & (ratio < vm.life_ratio_floor)
    return np.asarray(out | fault | wide | low, dtype=bool)


def voltage_effect(
    voltage: float,
    rated_voltage: float,
    technology: str,
    ballast: str | None = None,
    *,
    life_exponent: float | None = None,
    light_exponent: float | None = None,
    power_exponent: float | None = None,
    driver_range: tuple[float, float] | None = None,
    ballast_gain: float | None = None,
    band: float | None = None,
) -> VoltageEffect:
    """Life, light and power factors for one lamp type at one operating voltage (volts)."""
    d, ballast = _checked_ballast(technology, ballast)
    if not (math.isfinite(voltage) and voltage > 0):
        raise ValueError("operating voltage must be a positive number of volts")
    if not (math.isfinite(rated_voltage) and rated_voltage > 0):
        raise ValueError("rated voltage must be a positive number of volts")
    dmin, dmax = _driver_ratios(ballast, rated_voltage, driver_range)
    n = d.life_exponent if life_exponent is None else life_exponent
    k = d.light_exponent if light_exponent is None else light_exponent
    m = d.power_exponent if power_exponent is None else power_exponent
    g = BALLAST_POWER_GAIN[ballast] if ballast_gain is None else ballast_gain
    bnd = BALLAST_VOLTAGE_BAND[ballast] if band is None else band
    floor = d.life_ratio_floor if d.life_ratio_floor is not None else math.nan
    ratio = voltage / rated_voltage
    life, light, power, out = voltage_factors(
        _one(ratio),
        _one(n),
        _one(k),
        _one(m),
        _one(g),
        np.array([d.is_filament]),
        band=_one(bnd),
        life_ratio_floor=_one(floor),
        driver_min_ratio=_one(dmin),
        driver_max_ratio=_one(dmax),
    )
    case = _Case(
        voltage=voltage,
        ratio=ratio,
        ballast=ballast,
        is_filament=d.is_filament,
        gain=g,
        band=bnd,
        floor=floor,
        driver_range=driver_range,
        outside_driver=bool(out[0]),
    )
    return VoltageEffect(float(life[0]), float(light[0]), float(power[0]), _voltage_warnings(case))


# Default bounds of the switching factor (switching_life_factor's max_factor / min_factor).
SWITCHING_MAX_FACTOR = 1.5
SWITCHING_MIN_FACTOR = 0.5


def switching_life_factor(
    hours_per_start: ArrayLike,
    rated_hours_per_start: ArrayLike | None,
    second_hours_per_start: ArrayLike | None = None,
    second_life_ratio: ArrayLike | None = None,
    *,
    max_factor: float = SWITCHING_MAX_FACTOR,
    min_factor: float = SWITCHING_MIN_FACTOR,
    default_slope: ArrayLike = DEFAULT_SWITCHING_SLOPE,
) -> tuple[FloatArray, BoolArray]:
    """Life multiplier vs the rated switching cycle, and a flag where it was bounded.

    Linear in ln(hours per start) through (rated h/start, 1.0) and (second h/start, second
    life ratio); without a second point (NaN) the slope is default_slope per unit ln(h/start)
    (NaN there also means the default). Factor 1.0 where the rated cycle is None/NaN (no
    switching model) or the operating cycle is NaN (assume the rated cycle). Results are
    clipped to [min_factor, max_factor]; clipped positions are flagged.
    """
    if not (0 < min_factor <= 1.0 <= max_factor):
        raise ValueError("need 0 < min_factor <= 1 <= max_factor")
    h = _arr(hours_per_start)
    hr = _opt(rated_hours_per_start)
    h2 = _opt(second_hours_per_start)
    q2 = _opt(second_life_ratio)
    slope0 = _arr(default_slope)
    if np.any(h <= 0) or np.any(hr <= 0) or np.any(h2 <= 0):
        raise ValueError("hours per start must be positive burn hours")
    if np.any(q2 <= 0):
        raise ValueError("second life ratio must be positive")
    if np.any(np.isnan(h2) != np.isnan(q2)):
        raise ValueError("second switching point needs both hours per start and life ratio")
    if np.any(h2 == hr):
        raise ValueError("second switching point must be at a different hours per start")

    slope, ln_rated = switching_slope(hr, h2, q2, slope0)
    return switching_factor_at(h, slope, ln_rated, min_factor=min_factor, max_factor=max_factor)


def switching_slope(
    rated_hours_per_start: FloatArray,
    second_hours_per_start: FloatArray,
    second_life_ratio: FloatArray,
    default_slope: FloatArray,
) -> tuple[FloatArray, FloatArray]:
    """(slope per unit ln(hours per start), ln(rated hours per start)) of switching models.

    The constants of switching_life_factor, one per model (a fleet computes them once per
    lamp type): the slope through the second point where there is one, else default_slope
    (NaN = DEFAULT_SWITCHING_SLOPE); slope 0 and ln 0 where there is no model (NaN rated).
    """
    no_model = np.isnan(rated_hours_per_start)
    ln_rated = np.log(np.where(no_model, 1.0, rated_hours_per_start))
    has_second = ~np.isnan(second_hours_per_start)
    with np.errstate(divide="ignore", invalid="ignore"):
        slope_2 = (second_life_ratio - 1.0) / (
            np.log(np.where(has_second, second_hours_per_start, 2.0)) - ln_rated
        )
    slope0 = np.where(np.isnan(default_slope), DEFAULT_SWITCHING_SLOPE, default_slope)
    slope = np.where(no_model, 0.0, np.where(has_second, slope_2, slope0))
    return np.asarray(slope, dtype=np.float64), np.asarray(ln_rated, dtype=np.float64)


def switching_factor_at(
    hours_per_start: FloatArray,
    slope: FloatArray,
    ln_rated: FloatArray,
    *,
    min_factor: float = SWITCHING_MIN_FACTOR,
    max_factor: float = SWITCHING_MAX_FACTOR,
) -> tuple[FloatArray, BoolArray]:
    """Switching factor 1 + slope ln(h / h_rated), clipped, and where it was clipped.

    NaN hours per start (the rated cycle) and slope 0 (no model, or continuous burning
    against a flat model: 0 x inf) give 1.0.
    """
    with np.errstate(divide="ignore", invalid="ignore"):
        # ln of (operating / rated) hours per start, times the slope
        raw = 1.0 + slope * (np.log(hours_per_start) - ln_rated)
    raw = np.where(np.isnan(raw), 1.0, raw)
    factor = np.clip(raw, min_factor, max_factor)
    warn = (raw < min_factor - _BAND_TOL) | (raw > max_factor + _BAND_TOL)
    return factor, warn
