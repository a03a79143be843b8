"""Renewal function: FFT power-series division against the O(n²) recursion, and one area's plan.

Run: python benchmarks/bench_renewal.py [--quick] [--repeats N]
Rows (P2): weibull_renewal on 2,000 and 20,000 steps (FFT division, Richardson step
included) against (a) a plain O(n²) midpoint recursion written in a few lines of numpy,
run on the same fine and half grids the Richardson step needs, and (b) the kept O(n²)
oracle (renewal_on_grid(direct=True)). Targets: <= 0.5x the plain recursion at 2,000
steps, <= 10 ms at 20,000. Also one area's interval optimisation (target <= 50 ms).
"""

from __future__ import annotations

import sys
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))
sys.path.insert(0, str(Path(__file__).resolve().parent))

from _table import Row, Table, median_s, parser

from service.reliability.renewal import (
    midpoint_scheme_direct,
    renewal_on_grid,
    weibull_renewal,
)
from service.reliability.replacement import plan_block_replacement
from service.reliability.weibull import Weibull
from service.reliability.weibull import cdf as weibull_cdf


def plain_recursion(f: np.ndarray) -> np.ndarray:
    """M_i (1 - ΔF_1/2) = F_i + ΔF_1 M_{i-1}/2 + Σ_{j>=2} ΔF_j (M_{i-j} + M_{i-j+1})/2."""
    n = f.size - 1
    d = np.diff(f, prepend=0.0)
    d_rev = d[::-1].copy()  # d_rev[n - j] = ΔF_j: a contiguous slice per step
    m = np.zeros(n + 1)
    mid = np.zeros(n)  # (M_k + M_{k+1})/2
    for i in range(1, n + 1):
        m[i] = (f[i] + 0.5 * d[1] * m[i - 1] + mid[: i - 1] @ d_rev[n - i : n - 1]) / (
            1.0 - 0.5 * d[1]
        )
        mid[i - 1] = 0.5 * (m[i - 1] + m[i])
    return m


def main() -> int:
    """Print and write the rows."""
    args = parser(__doc__, default_repeats=5).parse_args()
    quick = args.quick
    repeats = 1 if quick else args.repeats
    table = Table("bench_renewal", quick)
    # Demo lamp: a linear fluorescent rated 24,000 h (B50) with Weibull shape 5.
    life = Weibull.from_rated_life(24000.0, 5.0)
    horizon = 3.0 * life.mean()
    for n in (200, 2000) if quick else (2000, 20000):
        t = np.linspace(0.0, horizon, n + 1)
        f = weibull_cdf(t, life.shape, life.scale)
        f_half = np.ascontiguousarray(f[::2])
        reps = repeats if n <= 2000 else max(1, min(repeats, 3))  # the anchor is ~1 s here

        def fast(n: int = n) -> object:
            return weibull_renewal(life.shape, life.scale, horizon, n=n)

        def anchor(f: np.ndarray = f, f_half: np.ndarray = f_half) -> object:
            return plain_recursion(f), plain_recursion(f_half)

        target = "" if quick else "<= 0.5x" if n == 2000 else "<= 10 ms"
        table.timed(
            "P2",
            f"renewal, {n:,} steps, FFT division",
            fast,
            anchor="plain numpy O(n²) recursion, both grids",
            anchor_fn=anchor,
            repeats=reps,
            target=target,
        )
        fast_s = table.rows[-1].figure_s
        step = float(t[1])
        direct_s, _ = median_s(lambda f=f, step=step: renewal_on_grid(f, step, direct=True), reps)
        table.add(
            Row(
                "P2",
                f"renewal, {n:,} steps, FFT division",
                fast_s,
                "kept O(n²) oracle (direct=True)",
                direct_s,
                reps,
            )
        )
    plan_s, _ = median_s(
        lambda: plan_block_replacement(
            life, 12.0, 45.0, light_floor_h=20000.0, burnout_ceiling=0.15, n=2000
        ),
        repeats,
        warmup=1,
    )
    table.add(
        Row("-", "interval optimisation, one area", plan_s, repeats=repeats, target="<= 50 ms")
    )
    # The anchor solves the same equations: its M must equal the oracle's.
    f = weibull_cdf(np.linspace(0.0, horizon, 201), life.shape, life.scale)
    gap = float(np.max(np.abs(plain_recursion(f) - midpoint_scheme_direct(f))))
    print(f"anchor vs oracle on 200 steps: max |dM| = {gap:.1e}")
    table.finish(args.json)
    return 0 if gap <= 1e-12 else 1


if __name__ == "__main__":
    sys.exit(main())
