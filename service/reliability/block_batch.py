"""Block replacement for many problems that share one unit renewal curve, in one numpy pass.

A Weibull life of shape beta and scale eta has M(t) = M_1(t / eta), M_1 the renewal function
of the eta = 1 life (F depends on t/eta only), so problems of the same shape (and horizon as
a multiple of eta) share one renewal solve: their curves are the unit curve with t scaled by
eta and the density by 1/eta (planning.group_plan.weibull_renewal_scaled). Here the cost rate
C(T) = (c_group + c_spot·M(T)) / T [Barlow & Proschan, ch. 4] is evaluated on every problem's
grid at once (a problems x grid matrix), both minimisations (over the horizon, up to the
tightest cap) refine their grid minimum with one vectorised Brent search
(bounded_search.py), and each problem's plan is decided by replacement._decide. The
arithmetic is the scalar path's, operation for operation (M by the same cubic Hermite
formula as RenewalCurve.at), so each plan equals plan_block_replacement's on that curve.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray

from service.reliability.arrays import FloatArray
from service.reliability.arrays import IndexArray as IntArray
from service.reliability.bounded_search import bounded_minimum_many
from service.reliability.renewal import RenewalCurve
from service.reliability.replacement import (
    BlockPlan,
    Searched,
    _caps,
    _check_costs,
    _decide,
    _mean_life,
    _tightest,
)

ROWS_PER_CHUNK = 64  # problems per grid chunk (64 x 2000 floats = 1 MB: stays in cache)


@dataclass(frozen=True, kw_only=True)
class ScaledProblems:
    """Problems on one unit renewal curve: per problem the scale and the cost and caps.

    Caps are NaN where not set. Every rupture cap must lie within the scaled horizon.
    """

    unit: RenewalCurve  # the eta = 1 curve (its cdf is needed for a burnout ceiling)
    scale_h: FloatArray  # eta per problem, hours
    c_group: FloatArray
    c_spot: FloatArray
    mean_life_h: FloatArray
    light_floor_h: FloatArray
    burnout_ceiling: FloatArray  # share of positions
    rupture_cap_h: FloatArray


def _m(unit: RenewalCurve, scale: FloatArray, x: FloatArray) -> FloatArray:
    """M(x) on each problem's scaled curve (scale broadcast against x): RenewalCurve.at."""
    h = unit.t[1] * scale - unit.t[0] * scale
    n = unit.t.size - 1
    horizon = unit.t[-1] * scale
    xc = np.clip(x, 0.0, horizon)
    k = np.minimum((xc / h).astype(np.int64), n - 1)
    s = (xc - unit.t[k] * scale) / h
    s2 = s * s
    s3 = s2 * s
    val = (
        (2 * s3 - 3 * s2 + 1) * unit.m[k]
        + (s3 - 2 * s2 + s) * h * (unit.density[k] / scale)
        + (-2 * s3 + 3 * s2) * unit.m[k + 1]
        + (s3 - s2) * h * (unit.density[k + 1] / scale)
    )
    beyond = np.maximum(x - horizon, 0.0)
    last = unit.density[-1] / scale
    out: FloatArray = np.where(x <= 0.0, 0.0, np.maximum(val, 0.0) + beyond * last)
    return out


def _m_on_grid(unit: RenewalCurve, scale: FloatArray, x: FloatArray) -> FloatArray:
    """_m at each problem's own grid points x = unit.t[1:] * scale (rows: problems).

    Where x / h lands on the knot itself the Hermite cubic gives M there exactly (s = 0), so
    only the points that rounding puts in the cell below take the whole formula.
    """
    h = unit.t[1] * scale - unit.t[0] * scale
    n = unit.t.size - 1
    k = np.minimum((x / h[:, None]).astype(np.int64), n - 1)
    j = np.arange(1, n + 1)
    out = np.broadcast_to(unit.m[1:], x.shape).copy()
    r, c = np.nonzero(k != j[None, :])
    out[r, c] = _m(unit, scale[r], x[r, c])
    return out


def _minimise_up_to(
    p: ScaledProblems, rows: IntArray, g_t: FloatArray, g_c: FloatArray, limit: FloatArray
) -> tuple[FloatArray, FloatArray, NDArray[np.bool_]]:
    """replacement._minimise_up_to for each row: (T, C, at the limit)."""
    scale, cg, cs = p.scale_h[rows], p.c_group[rows], p.c_spot[rows]
    c_lim = (cg + cs * _m(p.unit, scale, limit)) / limit
    m = (g_t < limit[:, None]).sum(axis=1)  # grid points below the limit (a prefix)
    col = np.arange(g_t.shape[1])
    masked = np.where(col[None, :] < m[:, None], g_c, np.inf)
    k = masked.argmin(axis=1)
    r = np.arange(rows.size)
    at_limit = (m == 0) | (c_lim < masked[r, k])  # the first minimum wins a tie
    x_grid, c_grid = g_t[r, k], masked[r, k]
    lo = np.where(k > 0, g_t[r, np.maximum(k - 1, 0)], 0.5 * g_t[:, 0])
    hi = np.where(k + 1 < m, g_t[r, np.minimum(k + 1, g_t.shape[1] - 1)], limit)
    search = ~at_limit & (hi - lo > 0)
    x, c = x_grid.copy(), c_grid.copy()
    if search.any():
        idx = np.nonzero(search)[0].astype(np.intp)

        def cost(xs: FloatArray, which: IntArray) -> FloatArray:
            j = idx[which]
            out: FloatArray = (cg[j] + cs[j] * _m(p.unit, scale[j], xs)) / xs
            return out

        xb, cb = bounded_minimum_many(cost, lo[idx], hi[idx], 1e-6 * hi[idx])
        take = cb <= c_grid[idx]
        x[idx] = np.where(take, xb, x[idx])
        c[idx] = np.where(take, cb, c[idx])
    x = np.where(at_limit, limit, x)
    c = np.where(at_limit, c_lim, c)
    return x, c, at_limit | (x >= limit * (1 - 1e-9))


def _opt(v: float) -> float | None:
    return None if np.isnan(v) else float(v)


def _grids(p: ScaledProblems) -> tuple[FloatArray, FloatArray]:
    """Every problem's grid (as weibull_renewal_scaled makes it) and C(T) on it, by chunks."""
    g_t = p.unit.t[None, 1:] * p.scale_h[:, None]  # the whole grid lies in the horizon
    g_c = np.empty_like(g_t)
    for start in range(0, p.scale_h.size, ROWS_PER_CHUNK):
        r = slice(start, start + ROWS_PER_CHUNK)
        m = _m_on_grid(p.unit, p.scale_h[r], g_t[r])
        g_c[r] = (p.c_group[r, None] + p.c_spot[r, None] * m) / g_t[r]
    return g_t, g_c


def _tightest_caps(p: ScaledProblems, horizon: FloatArray) -> list[tuple[str, float]]:
    """Each problem's tightest cap (name, hours), or the horizon."""
    out = []
    for j in range(p.scale_h.size):
        curve = RenewalCurve(t=p.unit.t * p.scale_h[j], m=p.unit.m, density=p.unit.density)
        cdf_curve = RenewalCurve(t=curve.t, m=curve.m, density=curve.density, cdf=p.unit.cdf)
        caps = _caps(
            cdf_curve,
            _opt(p.light_floor_h[j]),
            _opt(p.burnout_ceiling[j]),
            _opt(p.rupture_cap_h[j]),
        )
        if not np.isnan(p.rupture_cap_h[j]) and p.rupture_cap_h[j] > horizon[j]:
            raise ValueError("the renewal curve must reach the rupture cap")
        out.append(_tightest(caps, float(horizon[j])))
    return out


def plan_block_replacement_scaled(p: ScaledProblems) -> list[BlockPlan]:
    """plan_block_replacement for every problem, on its scaled unit curve, in bulk."""
    costs = zip(p.c_group.tolist(), p.c_spot.tolist(), p.mean_life_h.tolist(), strict=True)
    for cg, cs, mu in costs:
        _check_costs(cg, cs)
        _mean_life(p.unit, mu)
    rows = np.arange(p.scale_h.size, dtype=np.intp)
    horizon = p.unit.t[-1] * p.scale_h
    caps = _tightest_caps(p, horizon)
    g_t, g_c = _grids(p)
    free = _minimise_up_to(p, rows, g_t, g_c, horizon)
    held = _minimise_up_to(p, rows, g_t, g_c, np.array([c[1] for c in caps]))
    expected = _m(p.unit, p.scale_h, held[0])
    out = []
    for j in rows.tolist():
        searched = Searched(
            c_group=float(p.c_group[j]),
            c_spot=float(p.c_spot[j]),
            spot_rate=float(p.c_spot[j]) / float(p.mean_life_h[j]),
            horizon=float(horizon[j]),
            rupture_cap_h=_opt(p.rupture_cap_h[j]),
            notes=[],
            g_t=g_t[j],
            g_c=g_c[j],
            unconstrained=(float(free[0][j]), float(free[1][j]), bool(free[2][j])),
            cap_name=caps[j][0],
            constrained=(float(held[0][j]), float(held[1][j]), bool(held[2][j])),
            expected_spot=float(expected[j]),
        )
        out.append(_decide(searched))
    return out
