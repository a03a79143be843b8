"""Fleet evaluation: every lamp position's survival, failure risk, light and power at once.

Per position i of lamp type k (all vectorised over N positions, the lumen curves too: one
table of every type's curve pieces):

- voltage ratio r = V / V_rated; voltage, light and power factors from
  conditions.voltage_factors (filament power laws or ballast lamp-power model);
- switching factor from conditions.switching_life_factor (ln(hours per start) interpolation);
- life factor = voltage life factor x switching factor; effective scale
  eta_i = eta_k x life factor (accelerated-failure-time scaling, shape unchanged
  [published: Nelson, *Accelerated Testing*]);
- survival S(a) = exp(-(a/eta_i)^beta); conditional failure within the horizon w:
  1 - S(a + w)/S(a) [Weibull, see weibull.py];
- with a history (exposure.ExposureHistory: burn-hour segments at known voltages) the age
  is accumulated instead: rated age a_r = sum dt_j / f(V_j) + uncovered hours / f_now
  (cumulative exposure [published: Nelson, *Accelerated Testing*]), S = exp(-(a_r/eta_k)^beta)
  and the horizon adds w / f_now; a segment with known starts takes the switching factor of
  its own hours per start (exposure.py), one without takes the position's;
- discharge lamps below rated voltage: life factor capped at 1 (conditions.py), and a
  supply-fault flag below the ballast's band (warn_supply_fault);
- lumen fraction (every type's curve at once, lumen_table.LumenTable) = maintained light (dirt.maintained_light): LLD(a) x luminaire dirt factor
  (luminaire_factor now, luminaire_factor_end at the horizon end, from the caller; 1 =
  clean) x voltage light factor; for curves in fractions of rated life the
  life used is the effective B50 life eta_i (ln 2)^(1/beta) (rated life taken as the median);
- expected failures within the horizon, no replacement: sum of the conditional failure
  probabilities (renewal-based counts are computed elsewhere).

Ages and horizons are burn hours, voltages volts.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass, field
from functools import cached_property
from typing import Any

import numpy as np
from numpy.typing import ArrayLike, NDArray

from service.reliability.arrays import BoolArray, FloatArray
from service.reliability.arrays import IndexArray as IntArray
from service.reliability.conditions import (
    MIN_POWER_RATIO,
    SWITCHING_MAX_FACTOR,
    SWITCHING_MIN_FACTOR,
    supply_fault,
    switching_factor_at,
    switching_life_factor,
    switching_slope,
    voltage_factors_of,
    voltage_life_factor,
)
from service.reliability.dirt import maintained_light
from service.reliability.exposure import ExposureHistory, accumulated_exposure
from service.reliability.lumen import LumenCurve, default_lumen_curve
from service.reliability.lumen_table import LumenTable
from service.reliability.technologies import (
    BALLAST_POWER_GAIN,
    BALLAST_VOLTAGE_BAND,
    DEFAULT_SWITCHING_SLOPE,
    TECHNOLOGIES,
    TECHNOLOGY_DEFAULTS,
)
from service.reliability.weibull import scale_from_rated_life

_LN2 = math.log(2.0)


def _empty() -> FloatArray:
    return np.empty(0, dtype=np.float64)


@dataclass(frozen=True)
class LampTypeSpec:
    """Per-type parameters; None takes the technology default (see technologies.py)."""

    technology: str
    rated_life_h: float  # hours at the rated percentile, rated voltage and rated cycle
    rated_voltage: float  # volts
    ballast: str | None = None
    shape: float | None = None
    rated_percentile: float | None = None
    life_exponent: float | None = None
    light_exponent: float | None = None
    power_exponent: float | None = None
    ballast_gain: float | None = None
    # None = technology default; pass float("nan") for "no switching model".
    rated_hours_per_start: float | None = None
    second_hours_per_start: float | None = None
    second_life_ratio: float | None = None
    driver_range: tuple[float, float] | None = None  # volts (LED driver input range)
    lumen_curve: LumenCurve | None = None


# The per-type float columns of LampTypeTable, in order: ten always given, then five the
# table fills with defaults when left empty.
TABLE_COLUMNS: tuple[str, ...] = (
    "shape",
    "scale_h",
    "rated_voltage",
    "life_exponent",
    "light_exponent",
    "power_exponent",
    "ballast_gain",
    "rated_hours_per_start",
    "second_hours_per_start",
    "second_life_ratio",
    "voltage_band",
    "life_ratio_floor",
    "switching_slope",
    "driver_min_v",
    "driver_max_v",
)


@dataclass(frozen=True, eq=False)
class LampTypeTable:
    """K lamp types as parallel numpy arrays (length K) plus one lumen curve per type."""

    shape: FloatArray  # Weibull beta
    scale_h: FloatArray  # Weibull eta at rated voltage and rated cycle, hours
    rated_voltage: FloatArray  # volts
    life_exponent: FloatArray
    light_exponent: FloatArray
    power_exponent: FloatArray
    ballast_gain: FloatArray  # NaN for filament lamps
    is_filament: BoolArray
    rated_hours_per_start: FloatArray  # NaN = no switching model
    second_hours_per_start: FloatArray  # NaN = no second point
    second_life_ratio: FloatArray  # NaN = no second point
    lumen_curves: tuple[LumenCurve, ...]
    # Optional extras (empty array = default for every type):
    voltage_band: FloatArray = field(default_factory=_empty)  # fraction; default 0.10
    life_ratio_floor: FloatArray = field(default_factory=_empty)  # NaN = none (halogen 0.90)
    switching_slope: FloatArray = field(default_factory=_empty)  # NaN = default slope
    driver_min_v: FloatArray = field(default_factory=_empty)  # volts; NaN = no range
    driver_max_v: FloatArray = field(default_factory=_empty)  # volts; NaN = no range

    def __post_init__(self) -> None:
        k = len(self.lumen_curves)
        fill = {
            "voltage_band": 0.10,
            "life_ratio_floor": math.nan,
            "switching_slope": DEFAULT_SWITCHING_SLOPE,
            "driver_min_v": math.nan,
            "driver_max_v": math.nan,
        }
        for name in TABLE_COLUMNS:
            arr = np.asarray(getattr(self, name), dtype=np.float64)
            if name in fill and arr.size == 0:
                arr = np.full(k, fill[name])
            if arr.shape != (k,):
                raise ValueError(f"{name} must have one value per lamp type ({k})")
            object.__setattr__(self, name, arr)
        filament = np.asarray(self.is_filament, dtype=bool)
        if filament.shape != (k,):
            raise ValueError(f"is_filament must have one value per lamp type ({k})")
        object.__setattr__(self, "is_filament", filament)
        if np.any(~(self.shape > 0)) or np.any(~(self.scale_h > 0)):
            raise ValueError("shape and scale_h must be positive")
        if np.any(~(self.rated_voltage > 0)):
            raise ValueError("rated voltage must be positive volts")

    @cached_property
    def condition_columns(self) -> ConditionColumns:
        """Per-type constants of the voltage and switching models, computed and checked once."""
        return ConditionColumns.of(self)

    @cached_property
    def lumen_table(self) -> LumenTable:
        """The K lumen curves as one table, evaluated for a whole fleet at once."""
        return LumenTable.from_curves(self.lumen_curves)

    @property
    def size(self) -> int:
        """Number of lamp types K."""
        return len(self.lumen_curves)

    @property
    def b50_factor(self) -> FloatArray:
        """(ln 2)^(1/beta) per type: median life = eta x this."""
        return np.power(_LN2, 1.0 / self.shape)

    @cached_property
    def b50_column(self) -> FloatArray:
        """b50_factor, computed once (the table is immutable)."""
        return self.b50_factor

    @classmethod
    def from_specs(cls, specs: Sequence[LampTypeSpec]) -> LampTypeTable:
        """Build the table from per-type parameters, filling gaps from technology defaults."""
        cols: dict[str, list[float]] = {name: [] for name in TABLE_COLUMNS}
        filament: list[bool] = []
        curves: list[LumenCurve] = []
        for s in specs:
            if s.technology not in TECHNOLOGY_DEFAULTS:
                raise ValueError(f"unknown technology {s.technology!r}; expected {TECHNOLOGIES}")
            d = TECHNOLOGY_DEFAULTS[s.technology]
            ballast = d.default_ballast if s.ballast is None else s.ballast
            if ballast not in BALLAST_POWER_GAIN:
                raise ValueError(f"unknown ballast {ballast!r}")
            if d.is_filament != (ballast == "none"):
                raise ValueError(f"ballast {ballast!r} does not fit {s.technology}")
            if not s.rated_life_h > 0:
                raise ValueError("rated life must be positive hours")
            shape = d.shape if s.shape is None else s.shape
            pct = d.rated_percentile if s.rated_percentile is None else s.rated_percentile
            cols["shape"].append(shape)
            cols["scale_h"].append(float(scale_from_rated_life(s.rated_life_h, shape, pct)))
            cols["rated_voltage"].append(s.rated_voltage)
            cols["life_exponent"].append(
                d.life_exponent if s.life_exponent is None else s.life_exponent
            )
            cols["light_exponent"].append(
                d.light_exponent if s.light_exponent is None else s.light_exponent
            )
            cols["power_exponent"].append(
                d.power_exponent if s.power_exponent is None else s.power_exponent
            )
            cols["ballast_gain"].append(
                BALLAST_POWER_GAIN[ballast] if s.ballast_gain is None else s.ballast_gain
            )
            rhps = s.rated_hours_per_start
            if rhps is None:
                rhps = math.nan if d.rated_hours_per_start is None else d.rated_hours_per_start
            cols["rated_hours_per_start"].append(rhps)
            cols["second_hours_per_start"].append(
                math.nan if s.second_hours_per_start is None else s.second_hours_per_start
            )
            cols["second_life_ratio"].append(
                math.nan if s.second_life_ratio is None else s.second_life_ratio
            )
            cols["voltage_band"].append(BALLAST_VOLTAGE_BAND[ballast])
            cols["life_ratio_floor"].append(
                math.nan if d.life_ratio_floor is None else d.life_ratio_floor
            )
            cols["switching_slope"].append(
                DEFAULT_SWITCHING_SLOPE if d.switching_slope is None else d.switching_slope
            )
            lo, hi = s.driver_range if s.driver_range is not None else (math.nan, math.nan)
            cols["driver_min_v"].append(lo)
            cols["driver_max_v"].append(hi)
            filament.append(d.is_filament)
            curves.append(
                s.lumen_curve
                if s.lumen_curve is not None
                else default_lumen_curve(s.technology, None if d.is_filament else s.rated_life_h)
            )
        arrays = {name: np.asarray(v, dtype=np.float64) for name, v in cols.items()}
        return cls(
            is_filament=np.asarray(filament, dtype=bool),
            lumen_curves=tuple(curves),
            **arrays,
        )


@dataclass(frozen=True, eq=False)
class ConditionColumns:
    """Per-type constants of conditions.voltage_factors and switching_life_factor (length K).

    A rule no type has (a halogen life floor, an LED driver range) is None: left out.
    """

    life_exponent: FloatArray
    light_exponent: FloatArray
    power_exponent: FloatArray
    gain: FloatArray  # ballast gain, 0 for filament lamps
    filament: BoolArray  # filament power laws (also where the gain is NaN)
    band: FloatArray
    floor: FloatArray | None
    driver_min: FloatArray | None  # fraction of rated voltage
    driver_max: FloatArray | None
    has_range: BoolArray | None  # the type's driver range has a bound
    switching_slope: FloatArray  # per unit ln(hours per start); 0 = no switching model
    ln_rated_hps: FloatArray  # ln(rated hours per start); 0 without a model

    @classmethod
    def of(cls, t: LampTypeTable) -> ConditionColumns:
        """The columns of a table, its switching models checked as switching_life_factor does."""
        switching_life_factor(  # checks the K models (raises on a bad one)
            np.full(t.size, math.nan),
            t.rated_hours_per_start,
            t.second_hours_per_start,
            t.second_life_ratio,
            default_slope=t.switching_slope,
        )
        slope, ln_rated = switching_slope(
            t.rated_hours_per_start,
            t.second_hours_per_start,
            t.second_life_ratio,
            t.switching_slope,
        )
        filament = t.is_filament | np.isnan(t.ballast_gain)
        has_range = ~np.isnan(t.driver_min_v) | ~np.isnan(t.driver_max_v)
        has_floor = ~np.isnan(t.life_ratio_floor)
        return cls(
            life_exponent=t.life_exponent,
            light_exponent=t.light_exponent,
            power_exponent=t.power_exponent,
            gain=np.where(filament, 0.0, t.ballast_gain),
            filament=filament,
            band=t.voltage_band,
            floor=t.life_ratio_floor if has_floor.any() else None,
            driver_min=t.driver_min_v / t.rated_voltage if has_range.any() else None,
            driver_max=t.driver_max_v / t.rated_voltage if has_range.any() else None,
            has_range=has_range if has_range.any() else None,
            switching_slope=slope,
            ln_rated_hps=ln_rated,
        )


@dataclass(frozen=True, eq=False)
class FleetResult:
    """Per-position results (arrays of length N) and the fleet's expected failures."""

    life_factor: FloatArray  # voltage x switching
    scale_h: FloatArray  # effective Weibull eta, hours
    survival: FloatArray  # S(age)
    p_fail_horizon: FloatArray  # P(fail within horizon | burning at age)
    lumen_fraction: FloatArray  # LLD(age) x luminaire dirt x voltage light factor
    lumen_fraction_end: FloatArray  # LLD(age + horizon) x dirt then x voltage light factor
    power_factor: FloatArray  # lamp watts / rated watts
    warn_voltage: BoolArray
    warn_switching: BoolArray
    expected_failures_horizon: float  # no-replacement expectation
    light_factor: FloatArray  # voltage light factor alone
    life_h: FloatArray  # effective median (B50) life, hours
    rated_age_h: FloatArray  # rated-condition-equivalent age (cumulative exposure), hours
    warn_supply_fault: BoolArray  # discharge lamp below its ballast's band (no life credit)
    effective_age_h: FloatArray  # the age at today's conditions doing the same wear, hours


# Positions per block: every step below runs on blocks of this many rows, whose arrays stay
# in the processor's cache (32,768 x 8 bytes = 256 KiB each) instead of streaming the whole
# fleet through memory once per step; measured fastest of 8k-128k on the 2-core machine
# (benchmarks/bench_fleet.py). Rows are independent, so blocks change no result.
BLOCK = 32_768

_RESULT_ARRAYS = (
    "life_factor",
    "scale_h",
    "survival",
    "p_fail_horizon",
    "lumen_fraction",
    "lumen_fraction_end",
    "power_factor",
    "light_factor",
    "life_h",
    "rated_age_h",
    "effective_age_h",
)
_RESULT_FLAGS = ("warn_voltage", "warn_switching", "warn_supply_fault")
_Outputs = dict[str, NDArray[Any]]  # the result arrays by FleetResult field, filled by block


def evaluate_fleet(
    types: LampTypeTable,
    type_index: ArrayLike,
    age_h: ArrayLike,
    voltage: ArrayLike,
    hours_per_start: ArrayLike,
    horizon_h: ArrayLike,
    *,
    history: ExposureHistory | None = None,
    luminaire_factor: ArrayLike = 1.0,
    luminaire_factor_end: ArrayLike = 1.0,
) -> FleetResult:
    """Evaluate N lamp positions at once (voltage NaN = rated; hours_per_start NaN = rated).

    voltage is the supply from now on; history (segments by row) gives the past supply,
    accumulated as exposure; rows without segments burned at `voltage` throughout.
    """
    k, age, volts, hps, horizon = _checked_inputs(
        types, type_index, (age_h, voltage, hours_per_start, horizon_h)
    )
    n = k.size
    out: _Outputs = {name: np.empty(n, dtype=np.float64) for name in _RESULT_ARRAYS}
    out |= {name: np.empty(n, dtype=bool) for name in _RESULT_FLAGS}
    lmf_now, lmf_end = (_per_row(f, n) for f in (luminaire_factor, luminaire_factor_end))
    blocks = [slice(i, min(i + BLOCK, n)) for i in range(0, n, BLOCK)]
    if history is None or not history.size:
        for b in blocks:  # one pass: each block's ages are its burn hours
            _conditions_block(types, k[b], volts[b], hps[b], out, None, b)
            out["effective_age_h"][b] = age[b]
            np.divide(age[b], out["life_factor"][b], out=out["rated_age_h"][b])
            _life_and_light_block(
                types, k[b], age[b], horizon[b], _at(lmf_now, b), _at(lmf_end, b), out, b, True
            )
    else:
        if history.position.max() >= n:
            raise ValueError("history rows out of range of the fleet")
        switching = np.empty(n, dtype=np.float64)
        for b in blocks:
            _conditions_block(types, k[b], volts[b], hps[b], out, switching, b)
        rated_age = _rated_age(types, k, age, out["life_factor"], switching, history)
        out["rated_age_h"][:] = rated_age
        np.multiply(rated_age, out["life_factor"], out=out["effective_age_h"])
        for b in blocks:
            _life_and_light_block(
                types, k[b], age[b], horizon[b], _at(lmf_now, b), _at(lmf_end, b), out, b, False
            )
    p_fail = out["p_fail_horizon"]
    return FleetResult(**out, expected_failures_horizon=float(p_fail.sum()))


def _per_row(x: ArrayLike, n: int) -> FloatArray | None:
    """A per-row factor as n values, or None where it is 1 for every row (nothing to apply)."""
    arr = np.asarray(x, dtype=np.float64)
    if arr.ndim == 0 and float(arr) == 1.0:
        return None
    return np.broadcast_to(arr, (n,))


def _at(x: FloatArray | None, b: slice) -> FloatArray | None:
    return None if x is None else x[b]


def _conditions_block(
    types: LampTypeTable,
    k: IntArray,
    volts: FloatArray,
    hps: FloatArray,
    out: _Outputs,
    switching_out: FloatArray | None,
    b: slice,
) -> None:
    """One block's voltage and switching factors, life factor and supply faults.

    conditions.voltage_factors, switching_life_factor and supply_fault, with their per-type
    constants taken from the table (computed and checked once per type) and gathered per
    position once for all three.
    """
    c = types.condition_columns
    ratio = volts / types.rated_voltage[k]  # NaN volts = rated
    ratio[np.isnan(ratio)] = 1.0
    gain, filament, band = c.gain[k], c.filament[k], c.band[k]
    life_v, light_v, power_v, warn_v = voltage_factors_of(
        ratio,
        c.life_exponent[k],
        c.light_exponent[k],
        c.power_exponent[k],
        gain,
        filament,
        band=band,
        life_ratio_floor=None if c.floor is None else c.floor[k],
        driver_min_ratio=None if c.driver_min is None else c.driver_min[k],
        driver_max_ratio=None if c.driver_max is None else c.driver_max[k],
        has_driver_range=None if c.has_range is None else c.has_range[k],
    )
    sw, warn_sw = switching_factor_at(hps, c.switching_slope[k], c.ln_rated_hps[k])
    if switching_out is not None:
        switching_out[b] = sw
    np.multiply(life_v, sw, out=out["life_factor"][b])
    out["light_factor"][b] = light_v
    out["power_factor"][b] = power_v
    out["warn_voltage"][b] = warn_v
    out["warn_switching"][b] = warn_sw
    out["warn_supply_fault"][b] = supply_fault(ratio, gain, filament, band=band)


def _life_and_light_block(
    types: LampTypeTable,
    k: IntArray,
    age: FloatArray,
    horizon: FloatArray,
    lmf_now: FloatArray | None,
    lmf_end: FloatArray | None,
    out: _Outputs,
    b: slice,
    history_free: bool,
) -> None:
    """One block's Weibull survival and risk, B50 life and maintained light."""
    eff_age = age if history_free else out["effective_age_h"][b]
    beta = types.shape[k]
    eta = np.multiply(types.scale_h[k], out["life_factor"][b], out=out["scale_h"][b])
    # log S at age and at age + horizon, computed once each (see weibull.log_sf).
    log_s_age = -np.power(eff_age / eta, beta)
    log_s_end = -np.power((eff_age + horizon) / eta, beta)
    np.exp(log_s_age, out=out["survival"][b])
    p_fail = np.expm1(log_s_end - log_s_age, out=out["p_fail_horizon"][b])
    np.negative(p_fail, out=p_fail)
    life_h = np.multiply(eta, types.b50_column[k], out=out["life_h"][b])
    lld_age, lld_end = _lumen(types, k, age, eff_age, horizon, life_h)
    light_v = out["light_factor"][b]
    # maintained light (dirt.maintained_light: LLD x LMF x light factor); a clean luminaire
    # (LMF 1 everywhere) multiplies by nothing.
    for lld, lmf, name in (
        (lld_age, lmf_now, "lumen_fraction"),
        (lld_end, lmf_end, "lumen_fraction_end"),
    ):
        if lmf is None:
            np.multiply(lld, light_v, out=out[name][b])
        else:
            out[name][b] = maintained_light(lld, light_v, lmf)


def _checked_inputs(
    types: LampTypeTable, type_index: ArrayLike, per_row: tuple[ArrayLike, ...]
) -> tuple[IntArray, FloatArray, FloatArray, FloatArray, FloatArray]:
    """The row indices and per-row (age, voltage, hours per start, horizon), checked."""
    k = np.asarray(type_index)
    if k.size == 0:
        k = k.astype(np.intp)
    if k.ndim != 1 or not np.issubdtype(k.dtype, np.integer):
        raise ValueError("type_index must be a 1-D integer array")
    n = k.size
    if n and (k.min() < 0 or k.max() >= types.size):
        raise ValueError("type_index out of range of the lamp type table")
    age, volts, hps, horizon = (
        np.broadcast_to(np.asarray(x, dtype=np.float64), (n,)) for x in per_row
    )
    if np.any(age < 0) or np.any(~np.isfinite(age)):
        raise ValueError("age must be finite, non-negative burn hours")
    if np.any(horizon < 0) or np.any(~np.isfinite(horizon)):
        raise ValueError("horizon must be finite, non-negative burn hours")
    if np.any(volts <= 0):
        raise ValueError("operating voltage must be positive volts")
    if np.any(hps <= 0):
        raise ValueError("hours per start must be positive burn hours")
    return k, age, volts, hps, horizon


def _lumen(
    types: LampTypeTable,
    k: IntArray,
    age: FloatArray,
    eff_age: FloatArray,
    horizon: FloatArray,
    life_h: FloatArray,
) -> tuple[FloatArray, FloatArray]:
    """Lamp lumen depreciation now and at the horizon end, every curve at once (lumen_table)."""
    table = types.lumen_table
    # Rated-life curves (filament) read the life used, at today's conditions' wear; hours
    # curves read burn hours (the same hours without a history).
    now = age
    if table.any_per_life and eff_age is not age:
        now = np.where(table.per_life[k], eff_age, age)
    read = table.reader(k, life_h)
    # ages and horizons are checked non-negative (_checked_inputs)
    return read.at(now, nonnegative=True), read.at(now + horizon, nonnegative=True)


def _rated_age(
    types: LampTypeTable,
    k: IntArray,
    age: FloatArray,
    life_factor: FloatArray,
    switching: FloatArray,
    history: ExposureHistory,
) -> FloatArray:
    """Cumulative exposure of each row: its segments' hours / f(V), the rest at today's f."""
    n = age.size
    row = history.position
    ks = k[row]
    # Per-type constants first (K values), gathered once per segment: the same formulas as
    # conditions.voltage_life_factor, with the work each type does not need left out.
    ratio = history.voltage * (1.0 / types.rated_voltage)[ks]
    if np.isnan(ratio).any():
        ratio = np.where(np.isnan(ratio), 1.0, ratio)
    filament_k = types.is_filament | np.isnan(types.ballast_gain)
    gain_k = np.where(filament_k, 0.0, types.ballast_gain)
    fil = filament_k[ks]
    p_lamp = np.maximum(1.0 + gain_k[ks] * (ratio - 1.0), MIN_POWER_RATIO)
    # x^-n as exp(-n ln x): the same power law, about twice as fast as np.power with an
    # exponent per element (x > 0: ratios of positive volts, lamp power >= MIN_POWER_RATIO).
    life_seg = np.log(np.where(fil, ratio, p_lamp))
    life_seg *= -types.life_exponent[ks]
    np.exp(life_seg, out=life_seg)
    # under-powered discharge lamps: no life credit (as conditions._life)
    life_seg = np.where(~fil & (ratio < 1.0), np.minimum(life_seg, 1.0), life_seg)
    # Types with a halogen floor or a driver range: the full rule, on their segments only.
    special_k = ~np.isnan(types.life_ratio_floor) | ~np.isnan(types.driver_min_v)
    special_k |= ~np.isnan(types.driver_max_v)
    if special_k.any():
        sel = np.nonzero(special_k[ks])[0]
        kk = ks[sel]
        life_seg[sel] = voltage_life_factor(
            ratio[sel],
            types.life_exponent[kk],
            types.ballast_gain[kk],
            types.is_filament[kk],
            life_ratio_floor=types.life_ratio_floor[kk],
            driver_min_ratio=(types.driver_min_v / types.rated_voltage)[kk],
            driver_max_ratio=(types.driver_max_v / types.rated_voltage)[kk],
        )
    exposure = accumulated_exposure(
        row, history.hours, life_seg * _segment_switching(types, ks, switching[row], history), n
    )
    covered = history.covered_hours(n)
    rest = np.maximum(age - covered, 0.0)
    return exposure + rest / life_factor


def _segment_switching(
    types: LampTypeTable, ks: IntArray, position_sw: FloatArray, history: ExposureHistory
) -> FloatArray:
    """Switching factor per segment: its own hours per start where known, else the position's."""
    if not history.has_starts:
        return position_sw
    # The formula of conditions.switching_factor_at with the table's per-type constants
    # (condition_columns: slope 0, f = 1, where the type has no switching model).
    c = types.condition_columns
    slope, ln_hr = c.switching_slope, c.ln_rated_hps
    # In place over the segments (NaN hours per start stays NaN through every step), with
    # 1 + slope (ln h - ln h_rated) as slope ln h + (1 - slope ln h_rated).
    raw = np.log(history.segment_hours_per_start())
    raw *= slope[ks]
    raw += (1.0 - slope * ln_hr)[ks]
    np.clip(raw, SWITCHING_MIN_FACTOR, SWITCHING_MAX_FACTOR, out=raw)
    return np.where(np.isnan(raw), position_sw, raw)
