"""Time fleet evaluation: 1,000,000 positions across 50 lamp types, and a per-lamp loop.

Run: python benchmarks/bench_fleet.py [--quick] [--repeats N]
P1: 1,000,000 positions against the same arithmetic in bare numpy over the same arrays
(target <= 1.5x); P8: the same at 1k, 10k, 100k (growth no worse than linear).
X1: the same fleet with a history of two segments per position, each with its own voltage
and starts (cumulative exposure with a per-interval switching factor,
service.reliability.exposure) against the plain evaluation, same run (target <= 1.5x).
"""

from __future__ import annotations

import math
import sys
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))
sys.path.insert(0, str(Path(__file__).resolve().parent))

from _table import Table, parser

from service.reliability.conditions import switching_life_factor, voltage_effect
from service.reliability.exposure import ExposureHistory
from service.reliability.fleet import LampTypeSpec, LampTypeTable, evaluate_fleet
from service.reliability.technologies import TECHNOLOGIES, TECHNOLOGY_DEFAULTS
from service.reliability.weibull import Weibull

N_TYPES = 50
N_FLEET = 1_000_000
N_LOOP = 10_000


def make_specs(rng: np.random.Generator) -> list[LampTypeSpec]:
    """Fifty lamp types cycling through the technologies with varied ratings."""
    specs = []
    for i in range(N_TYPES):
        tech = TECHNOLOGIES[i % len(TECHNOLOGIES)]
        d = TECHNOLOGY_DEFAULTS[tech]
        rated_v = float(rng.choice([120.0, 230.0, 240.0, 277.0]))
        specs.append(
            LampTypeSpec(
                tech,
                d.typical_rated_life_h * float(rng.uniform(0.7, 1.5)),
                rated_v,
                shape=d.shape * float(rng.uniform(0.8, 1.2)),
                driver_range=(0.45 * rated_v, 1.1 * rated_v) if tech == "led" else None,
                second_hours_per_start=12.0 if d.rated_hours_per_start == 3.0 else None,
                second_life_ratio=1.25 if d.rated_hours_per_start == 3.0 else None,
            )
        )
    return specs


def make_fleet(
    n: int, table: LampTypeTable, rng: np.random.Generator
) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """Random positions: type, burn hours, volts, hours per start."""
    idx = rng.integers(0, table.size, n)
    age = rng.uniform(0.0, 30_000.0, n)
    volts = table.rated_voltage[idx] * rng.uniform(0.9, 1.08, n)
    hps = rng.choice([math.nan, 2.0, 3.0, 10.0, 24.0], n)
    return idx, age, volts, hps


def per_lamp_loop(
    specs: list[LampTypeSpec],
    table: LampTypeTable,
    idx: np.ndarray,
    age: np.ndarray,
    volts: np.ndarray,
    hps: np.ndarray,
    horizon_h: float,
) -> float:
    """The same model lamp by lamp in plain Python over the scalar functions."""
    total = 0.0
    for i in range(idx.size):
        s = specs[int(idx[i])]
        d = TECHNOLOGY_DEFAULTS[s.technology]
        eff = voltage_effect(
            float(volts[i]), s.rated_voltage, s.technology, driver_range=s.driver_range
        )
        sw, _ = switching_life_factor(
            float(hps[i]), d.rated_hours_per_start, s.second_hours_per_start, s.second_life_ratio
        )
        lamp = Weibull.from_rated_life(s.rated_life_h, s.shape or d.shape).scaled(
            eff.life_factor * float(sw)
        )
        total += float(lamp.conditional_failure(age[i], horizon_h))
        curve = table.lumen_curves[int(idx[i])]  # built once per type, as a loop would
        median = float(lamp.percentile(0.5))
        lh = median if curve.basis == "rated_life_fraction" else None
        _ = float(curve.at(age[i], lh)) * eff.light_factor
        _ = float(curve.at(age[i] + horizon_h, lh)) * eff.light_factor
    return total


def bare_numpy(
    table: LampTypeTable,
    idx: np.ndarray,
    age: np.ndarray,
    volts: np.ndarray,
    hps: np.ndarray,
    horizon_h: float,
) -> float:
    """The same arithmetic written plainly in numpy: the anchor of P1.

    Gathers per-type columns, an inverse-power voltage law for life, light and power,
    a log-linear switching factor, Weibull survival and conditional failure, and each
    position's lumen fraction from a 64-point table per type; no checks, no warnings.
    """
    rv = table.rated_voltage[idx]
    r = np.where(np.isnan(volts), 1.0, volts / rv)
    life_f = np.power(r, -table.life_exponent[idx])
    light_f = np.power(r, table.light_exponent[idx])
    power_f = np.power(r, table.power_exponent[idx])
    rated_hps = table.rated_hours_per_start[idx]
    sw = np.where(
        np.isnan(hps) | np.isnan(rated_hps),
        1.0,
        np.clip(1.0 + table.switching_slope[idx] * np.log(np.fmax(hps, 0.1) / rated_hps), 0.2, 3.0),
    )
    beta = table.shape[idx]
    eta = table.scale_h[idx] * life_f * sw
    log_a = -np.power(age / eta, beta)
    log_e = -np.power((age + horizon_h) / eta, beta)
    survival = np.exp(log_a)
    p_fail = -np.expm1(log_e - log_a)
    # Lumen fraction: one shared 64-point curve per type, by linear interpolation.
    grid = np.linspace(0.0, 60_000.0, 64)
    curves = 1.0 - 0.3 * (grid[None, :] / 60_000.0) * (1.0 + (np.arange(table.size) % 3)[:, None])
    cell = np.clip(age / grid[1], 0, 62.999)
    j = cell.astype(np.intp)
    w = cell - j
    lumen = (curves[idx, j] * (1 - w) + curves[idx, j + 1] * w) * light_f
    return float(p_fail.sum() + survival.sum() * 0 + lumen.sum() * 0 + power_f.sum() * 0)


def main() -> int:
    """Print and write the rows: P1 against bare numpy, P8 growth, the per-lamp loop."""
    args = parser(__doc__, default_repeats=5).parse_args()
    quick = args.quick
    repeats = 1 if quick else args.repeats
    table_rows = Table("bench_fleet", quick)
    rng = np.random.default_rng(2024)
    specs = make_specs(rng)
    table = LampTypeTable.from_specs(specs)
    horizon = 4_000.0  # burn hours ahead
    sizes = (1_000, 10_000) if quick else (1_000, 10_000, 100_000, N_FLEET)
    idx, age, volts, hps = make_fleet(sizes[-1], table, rng)
    for n in sizes:
        a, b, c, d = idx[:n], age[:n], volts[:n], hps[:n]
        table_rows.timed(
            "P1" if n == N_FLEET else "P8",
            f"fleet evaluation, {n:,} positions, {N_TYPES} types",
            lambda a=a, b=b, c=c, d=d: evaluate_fleet(table, a, b, c, d, horizon),
            anchor="bare numpy over the same arrays",
            anchor_fn=lambda a=a, b=b, c=c, d=d: bare_numpy(table, a, b, c, d, horizon),
            repeats=repeats,
            target="<= 1.5x" if n == N_FLEET else "linear growth",
        )
    # X1: two segments per position, the first half of its hours at another supply and, where
    # the position has a cycle, its own starts (each segment's switching factor of its own).
    n = sizes[-1]
    seg_hps = np.column_stack((hps * rng.uniform(0.5, 2.0, n), hps)).ravel()
    history = ExposureHistory(
        np.repeat(np.arange(n), 2),
        np.repeat(age / 2.0, 2),
        np.column_stack((volts * rng.uniform(0.94, 1.06, n), volts)).ravel(),
        np.repeat(age / 2.0, 2) / seg_hps,  # NaN where the position has no cycle
    )
    table_rows.timed(
        "X1",
        f"fleet evaluation with a 2-segment voltage and starts history, {n:,} positions",
        lambda: evaluate_fleet(table, idx, age, volts, hps, horizon, history=history),
        anchor="the plain evaluation (no history) of the same fleet",
        anchor_fn=lambda: evaluate_fleet(table, idx, age, volts, hps, horizon),
        repeats=repeats,
        target="<= 1.5x",
    )
    n_loop = 500 if quick else N_LOOP
    sidx, sage, svolts, shps = idx[:n_loop], age[:n_loop], volts[:n_loop], hps[:n_loop]
    table_rows.timed(
        "-",
        f"fleet evaluation, {n_loop:,} positions",
        lambda: evaluate_fleet(table, sidx, sage, svolts, shps, horizon),
        anchor="plain per-lamp Python loop",
        anchor_fn=lambda: per_lamp_loop(specs, table, sidx, sage, svolts, shps, horizon),
        repeats=1,
        warmup=0,
    )
    # Cross-check: both give the same expected failures on the small fleet.
    vec = evaluate_fleet(table, sidx, sage, svolts, shps, horizon).expected_failures_horizon
    loop = per_lamp_loop(specs, table, sidx, sage, svolts, shps, horizon)
    print(f"expected failures in {horizon:,.0f} h, small fleet: {vec:.6f} vs loop {loop:.6f}")
    table_rows.finish(args.json)
    return 0 if abs(vec - loop) <= 1e-6 * max(1.0, abs(loop)) else 1


if __name__ == "__main__":
    sys.exit(main())
