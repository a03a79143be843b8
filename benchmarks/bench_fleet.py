"""Time fleet evaluation: 1,000,000 positions across 50 lamp types, and a per-lamp loop.

Also the same fleet with a voltage history of two segments per position (cumulative
exposure, service.reliability.exposure), as a ratio to the plain evaluation in the same run.

Run: python benchmarks/bench_fleet.py
"""

from __future__ import annotations

import math
import sys
import time
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

from service.reliability.conditions import switching_life_factor, voltage_effect
from service.reliability.exposure import ExposureHistory
from service.reliability.fleet import LampTypeSpec, LampTypeTable, evaluate_fleet
from service.reliability.technologies import TECHNOLOGIES, TECHNOLOGY_DEFAULTS
from service.reliability.weibull import Weibull

N_TYPES = 50
N_FLEET = 1_000_000
N_LOOP = 10_000
RUNS = 5


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


def best_of(fn: object, runs: int) -> float:
    """Best wall-clock seconds of several runs."""
    best = math.inf
    for _ in range(runs):
        t0 = time.perf_counter()
        fn()  # type: ignore[operator]
        best = min(best, time.perf_counter() - t0)
    return best


def main() -> None:
    """Print the timings."""
    rng = np.random.default_rng(2024)
    specs = make_specs(rng)
    table = LampTypeTable.from_specs(specs)
    horizon = 4_000.0  # burn hours ahead

    idx, age, volts, hps = make_fleet(N_FLEET, table, rng)
    t_fleet = best_of(lambda: evaluate_fleet(table, idx, age, volts, hps, horizon), RUNS)
    print(
        f"fleet evaluation: {N_FLEET:,} positions, {N_TYPES} lamp types: "
        f"{t_fleet:.3f} s (best of {RUNS})"
    )

    # Two segments per position: the first half of its hours at one supply, the rest at today's.
    rows = np.repeat(np.arange(N_FLEET), 2)
    seg_h = np.repeat(age / 2.0, 2)
    seg_v = np.column_stack((volts * rng.uniform(0.94, 1.06, N_FLEET), volts)).ravel()
    history = ExposureHistory(rows, seg_h, seg_v)
    t_hist = best_of(
        lambda: evaluate_fleet(table, idx, age, volts, hps, horizon, history=history), RUNS
    )
    print(
        f"with a 2-segment voltage history ({history.size:,} segments): {t_hist:.3f} s "
        f"(best of {RUNS}); ratio to the plain evaluation above: {t_hist / t_fleet:.2f}x"
    )

    sidx, sage, svolts, shps = idx[:N_LOOP], age[:N_LOOP], volts[:N_LOOP], hps[:N_LOOP]
    t_vec_small = best_of(lambda: evaluate_fleet(table, sidx, sage, svolts, shps, horizon), RUNS)
    t_loop = best_of(lambda: per_lamp_loop(specs, table, sidx, sage, svolts, shps, horizon), 1)
    per_lamp_loop_s = t_loop / N_LOOP
    per_lamp_vec_s = t_fleet / N_FLEET
    print(f"plain per-lamp Python loop: {N_LOOP:,} positions: {t_loop:.3f} s")
    print(f"vectorised, same {N_LOOP:,} positions: {t_vec_small:.4f} s")
    print(
        f"speed-up per position (loop on {N_LOOP:,} vs vectorised on {N_FLEET:,}): "
        f"{per_lamp_loop_s / per_lamp_vec_s:,.0f}x"
    )
    print(f"speed-up on the same {N_LOOP:,} positions: {t_loop / t_vec_small:,.0f}x")
    # Cross-check: both give the same expected failures on the small fleet.
    vec = evaluate_fleet(table, sidx, sage, svolts, shps, horizon).expected_failures_horizon
    loop = per_lamp_loop(specs, table, sidx, sage, svolts, shps, horizon)
    print(f"expected failures in {horizon:,.0f} h, small fleet: {vec:.6f} vs loop {loop:.6f}")


if __name__ == "__main__":
    main()
