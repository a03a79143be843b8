"""Timing of the renewal solver and the group relamping planner.

Run: python benchmarks/bench_renewal.py
Targets: renewal function on a 2,000-step grid <= 20 ms; one area's interval
optimisation (renewal curve + grid search + refinement + caps) <= 50 ms.
"""

from __future__ import annotations

import statistics
import sys
import time
from collections.abc import Callable
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

from service.reliability.renewal import weibull_renewal
from service.reliability.replacement import plan_block_replacement
from service.reliability.weibull import Weibull


def median_ms(fn: Callable[[], object], repeats: int = 30, warmup: int = 3) -> float:
    """Median wall time of fn in milliseconds."""
    for _ in range(warmup):
        fn()
    times = []
    for _ in range(repeats):
        start = time.perf_counter()
        fn()
        times.append(time.perf_counter() - start)
    return 1000.0 * statistics.median(times)


def main() -> None:
    """Print the two timings against their targets."""
    # Demo lamp: a linear fluorescent rated 24,000 h (B50) with Weibull shape 5.
    life = Weibull.from_rated_life(24000.0, 5.0)
    horizon = 3.0 * life.mean()

    renewal_ms = median_ms(lambda: weibull_renewal(life.shape, life.scale, horizon, n=2000))
    plan_ms = median_ms(
        lambda: plan_block_replacement(
            life, 12.0, 45.0, light_floor_h=20000.0, burnout_ceiling=0.15, n=2000
        )
    )
    print(f"renewal function, 2,000-step grid: {renewal_ms:7.2f} ms (median; target <= 20 ms)")
    print(f"interval optimisation, one area:   {plan_ms:7.2f} ms (median; target <= 50 ms)")


if __name__ == "__main__":
    main()
