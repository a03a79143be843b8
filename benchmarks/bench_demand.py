"""Time the weekly lamp demand of 100,000 positions (arrays only, no database).

The figure: stock.forecast's arithmetic on a synthetic fleet (3 lamp types, ages spread
over a life, a group relamp planned for a third of the positions): cumulative expected spot
replacements at 27 week boundaries in one pass (stock.demand.weekly_cumulative: per-position
delayed renewal as one FFT convolution over all weeks), the new-lamp curves after the group
relamp, and the weekly Poisson-binomial mean, variance and 95 % quantile per lamp type
(normal path). D0 is the old path (one forecasting.spot_replacements sum per week
boundary), timed at 10,000 positions only (at 100,000 it took 27.8 s). The anchor, in the same run: a plain numpy
computation over the same grid, the conditional Weibull failure probabilities
1 - S(a + t)/S(a) with their weekly sums and variances (no renewal), as fast as numpy goes.

D2 is the demand mixed over each lamp type's uncertain scale (stock.demand.node_demand: the
one pass at each of the 9 Gauss-Hermite nodes, alike positions grouped on an age grid, then
the mixture's weekly mean and quantile, sd of ln eta 0.246, the catalogue prior), beside
TODAY's figure in the same run as its anchor (D1's arithmetic with the one pass ungrouped, as
before this change): the brief keeps D2 within 2x of it.

Run: python benchmarks/bench_demand.py [--quick] [--repeats N]
"""

from __future__ import annotations

import sys
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))
sys.path.insert(0, str(Path(__file__).resolve().parent))

from _table import Table, parser

from service.forecasting.spot_replacements import expected_replacements
from service.reliability.renewal import weibull_renewal
from service.stock import demand

WEEKS = 26


def fleet(n: int, seed: int = 1) -> dict[str, np.ndarray]:
    """A synthetic fleet: lamp type, shape table, scale, age, burn rate, group week."""
    rng = np.random.default_rng(seed)
    k = rng.integers(0, 3, n).astype(np.int64)
    shape = np.array([5.0, 3.0, 2.0])
    scale = np.array([26_000.0, 1_100.0, 12_000.0])[k]
    age = rng.uniform(0, 0.9, n) * scale
    rate = rng.choice([60.0, 80.0, 168.0], n)
    gw = np.where(rng.random(n) < 1 / 3, rng.integers(0, WEEKS, n), WEEKS).astype(np.int64)
    return {"k": k, "shape": shape, "scale": scale, "age": age, "rate": rate, "gw": gw}


def before_old(f: dict[str, np.ndarray]) -> np.ndarray:
    """The old path: one delayed-renewal sum per (position, week boundary)."""
    n, h1 = f["age"].size, WEEKS + 1
    win = (f["rate"][:, None] * np.arange(h1)[None, :]).ravel()
    rep = np.repeat
    return expected_replacements(
        f["shape"], rep(f["k"], h1), rep(f["scale"], h1), rep(f["age"], h1), win
    ).reshape(n, h1)


def before_new(f: dict[str, np.ndarray]) -> np.ndarray:
    """The one-pass path (stock.demand.weekly_cumulative)."""
    return demand.weekly_cumulative(f["shape"], f["k"], f["scale"], f["age"], f["rate"], WEEKS)


def figure(f: dict[str, np.ndarray], old: bool = False) -> object:
    """The service's demand arithmetic for the fleet."""
    n, h1 = f["age"].size, WEEKS + 1
    win = (f["rate"][:, None] * np.arange(h1)[None, :]).ravel()
    before = before_old(f) if old else before_new(f)
    after = np.zeros((n, h1))
    u = win.reshape(n, h1) / f["scale"][:, None]
    for kk in range(3):
        sel = (f["k"] == kk) & (f["gw"] < WEEKS)
        if not sel.any():
            continue
        curve = weibull_renewal(float(f["shape"][kk]), 1.0, float(u[sel].max()) * 1.0001, 1000)
        after[sel] = curve.at(u[sel])
    cum = demand.cumulative_with_group(before, after, f["gw"])
    p = demand.weekly_increments(cum)
    out = []
    for kk in range(3):
        sel = f["k"] == kk
        out.append(demand.week_demand(p[sel], np.zeros(WEEKS, dtype=np.int64), 0.95, 0.02))
    return out


def figure_today(f: dict[str, np.ndarray]) -> object:
    """The figure as it was before the mixture: the one pass without grouping alike positions."""
    saved = demand.GROUP_MIN
    demand.GROUP_MIN = 1 << 62
    try:
        return figure(f)
    finally:
        demand.GROUP_MIN = saved


def figure_mixed(f: dict[str, np.ndarray]) -> object:
    """Weekly demand mixed over each lamp type's lognormal scale (sd ln eta 0.246)."""
    sd = np.full(f["age"].size, 0.246)
    nodes = demand.node_demand(
        f["shape"], f["k"], f["scale"], f["age"], f["rate"], WEEKS, f["gw"], sd, f["k"]
    )
    p0 = np.zeros((0, WEEKS))
    grp = np.zeros(WEEKS, dtype=np.int64)
    return [demand.week_demand(p0, grp, 0.95, 0.02, spread=nd) for nd in nodes.values()]


def anchor(f: dict[str, np.ndarray]) -> object:
    """Plain numpy: conditional Weibull failure probabilities per week, summed per type."""
    t = f["rate"][:, None] * np.arange(WEEKS + 1)[None, :]
    beta = f["shape"][f["k"]][:, None]
    a = f["age"][:, None] / f["scale"][:, None]
    x = t / f["scale"][:, None]
    cum = -np.expm1(-((a + x) ** beta - a**beta))
    p = np.diff(cum, axis=1)
    return [
        (p[f["k"] == kk].sum(axis=0), (p * (1 - p))[f["k"] == kk].sum(axis=0)) for kk in range(3)
    ]


def main() -> int:
    """Print and write the rows."""
    args = parser(__doc__, default_repeats=5).parse_args()
    repeats = 1 if args.quick else args.repeats
    table = Table("bench_demand", args.quick)
    f10 = fleet(10_000)
    table.timed(
        "D0",
        f"weekly demand, old path (a sum per week), 10,000 positions x {WEEKS} weeks",
        lambda: figure(f10, old=True),
        anchor="plain numpy conditional Weibull, same grid",
        anchor_fn=lambda: anchor(f10),
        repeats=repeats,
    )
    for n in (10_000,) if args.quick else (10_000, 100_000):
        f = fleet(n)
        table.timed(
            "D1",
            f"weekly demand, {n:,} positions x {WEEKS} weeks",
            lambda f=f: figure(f),
            anchor="plain numpy conditional Weibull, same grid",
            anchor_fn=lambda f=f: anchor(f),
            repeats=repeats,
            target="" if args.quick or n < 100_000 else "<= 3 s (issue 13, with the database)",
        )
    n_mix = 10_000 if args.quick else 100_000
    fm = fleet(n_mix)
    table.timed(
        "D2",
        f"weekly demand mixed over the scale (9 nodes), {n_mix:,} positions x {WEEKS} weeks",
        lambda: figure_mixed(fm),
        anchor="today's D1 arithmetic (one pass ungrouped, no mixture), same fleet",
        anchor_fn=lambda: figure_today(fm),
        repeats=repeats,
        target="" if args.quick else "<= 2x its anchor (brief)",
    )
    # Sanity: with no group relamp and no renewal inside a week, the figure's week-1 mean is
    # the anchor's (a lamp rarely fails twice in a week).
    f = fleet(2000, seed=3)
    f["gw"] = np.full(2000, WEEKS, dtype=np.int64)
    got = figure(f)[0].spot_mean[0]  # type: ignore[index]
    ref = anchor(f)[0][0][0]  # type: ignore[index]
    print(f"week-1 mean, type 0: figure {got:.4f}, anchor {ref:.4f}")
    # The one pass against the old path on the same fleet (per-position cumulative curves).
    gap = float(np.abs(before_new(f) - before_old(f)).max())
    print(f"one pass vs old path: largest difference in cumulative replacements {gap:.2e}")
    table.finish(args.json)
    return 0 if abs(got - ref) <= 0.01 * ref + 1e-3 and gap < 0.01 else 1


if __name__ == "__main__":
    sys.exit(main())
