"""Group (block) and age replacement intervals, with the constraints a team sets.

Block replacement [Barlow & Proschan, *Mathematical Theory of Reliability*, ch. 4]:
every position in an area gets a new lamp every T burn hours, and failures in
between are spot-replaced. Long-run cost per position per burn hour

    C(T) = (c_group + c_spot · M(T)) / T,

with M the renewal function (see renewal.py). Spot replacement alone costs
c_spot / μ per position-hour (renewal-reward theorem, μ = mean life). Because
M(T) + 1 ≥ T/μ (Wald's identity on the first renewal after T), C(T) ≥ c_spot/μ
whenever c_group ≥ c_spot: group relamping can then never pay on cost alone.
Some life laws give no finite optimum at all (exponential life: C(T) = c_group/T
+ c_spot/μ keeps falling); the planner then answers "spot replacement only".

Constraints, all upper limits on T in burn hours:
- light floor: hours at which the group's light falls to the team's floor
  (computed by the caller from the lumen curve);
- burnout ceiling: largest share F(T) of the original lamps allowed to fail,
  T_ceiling = F^{-1}(share) (Weibull percentile);
- rupture cap: metal halide lamps that can rupture are group relamped at or
  before a cap (commonly near 70% of rated life, common practice). This one is a
  safety rule: a group relamp at or before the cap is required even when spot
  replacement would cost less; the extra cost is reported as safety_premium_rate.
The light floor and burnout ceiling are limits on a group plan; they do not
force a group plan when spot replacement is cheaper.

Age replacement [Barlow & Proschan]: each lamp is replaced at age T or at
failure, whichever comes first:

    C(T) = (c_p · S(T) + c_f · F(T)) / ∫_0^T S(t) dt,

and for a Weibull ∫_0^T S = η Γ(1 + 1/β) P(1/β, (T/η)^β) with P the regularised
lower incomplete gamma function. Run to failure costs c_f / μ.

Cost per delivered megalumen-hour (alternative block objective). With prompt
spot replacement every position burns throughout, so a cycle of length T costs
c_group + c_spot·M(T) + tariff·W·T/1000 (W lamp watts at the actual voltage).
The expected relative light of a position at group age t follows from the
renewal argument [Cox, ch. 4]: the lamp burning there is either the original one
(probability S(t), light L(t)) or was installed at the last renewal s < t
(renewal density m(s)) and has survived t - s since, so

    E[light fraction at t] = S(t)·L(t) + ∫_0^t m(s) S(t-s) L(t-s) ds,

which is exactly 1 when L ≡ 1 (a lamp is always burning). Delivered light over
the cycle is Φ0 ∫_0^T E[...] dt (Φ0 initial lumens at the actual voltage). The
only approximation is the numerical convolution on the renewal grid (trapezoid
rule); lamp power is taken as constant over life. Spot replacement alone is the
stationary limit: each position holds a lamp of age u with density S(u)/μ
(renewal-reward, equilibrium age), so the mean light is ∫S·L/∫S and the cost per
megalumen-hour (c_spot/μ + energy rate) / (Φ0 ∫S·L/∫S). The best interval is the
minimiser over (0, cap] (the caps as above); "spot only" when it does not beat the
spot-only figure or when the cost per megalumen-hour still falls at the horizon.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass, field

import numpy as np
from numpy.typing import ArrayLike, NDArray
from scipy.optimize import minimize_scalar
from scipy.special import gammainc

from service.reliability.renewal import RenewalCurve, weibull_renewal
from service.reliability.weibull import Weibull

FloatArray = NDArray[np.float64]

# A group plan must beat spot replacement by more than this share of the spot
# rate: it keeps rounding noise in M(T) from turning "spot only" into a plan.
_MIN_REL_SAVING = 1e-6
_DEFAULT_HORIZON_MEANS = 3.0  # default longest interval, in mean lives


def _empty() -> FloatArray:
    return np.empty(0, dtype=np.float64)


def block_cost_rate(
    T: ArrayLike, renewal_curve: RenewalCurve, c_group: float, c_spot: float
) -> FloatArray:
    """Block replacement cost per position per burn hour, (c_group + c_spot·M(T)) / T."""
    tt = np.asarray(T, dtype=np.float64)
    if np.any(tt <= 0):
        raise ValueError("replacement intervals must be positive hours")
    out: FloatArray = (c_group + c_spot * renewal_curve.at(tt)) / tt
    return out


@dataclass(frozen=True, eq=False)
class BlockPlan:
    """Chosen group relamping interval (or spot only) and its cost figures per position."""

    interval_h: float | None  # None: spot replacement only
    cost_rate: float  # per position per burn hour at interval_h, or the spot-only rate
    spot_only_rate: float  # c_spot / mean life (renewal-reward limit)
    saving_rate: float  # max(spot_only_rate - cost_rate, 0)
    binding: str  # "cost_optimum" | "light_floor" | "burnout_ceiling" | "rupture_cap" | "spot_only"
    unconstrained_optimum_h: float | None  # interior cost minimum ignoring the caps, if it pays
    expected_spot_per_position: float  # M(interval_h); 0.0 when spot only
    grid_t: FloatArray  # candidate intervals, hours
    grid_cost: FloatArray  # C(T) on grid_t
    notes: tuple[str, ...]
    safety_premium_rate: float = 0.0  # cost_rate - spot_only_rate when the rupture cap forces it
    horizon_h: float = 0.0  # longest interval considered


def _refine(
    cost: Callable[[float], float], lo: float, hi: float, x_grid: float, c_grid: float
) -> tuple[float, float]:
    """Bounded Brent search on [lo, hi]; keep the grid point if it is better."""
    if hi - lo <= 0:
        return x_grid, c_grid
    res = minimize_scalar(cost, bounds=(lo, hi), method="bounded", options={"xatol": 1e-6 * hi})
    x, c = float(res.x), float(res.fun)
    if c <= c_grid:
        return x, c
    return x_grid, c_grid


def _burnout_interval(life: Weibull | RenewalCurve, share: float) -> float:
    if not 0.0 < share < 1.0:
        raise ValueError("burnout_ceiling must be a share in (0, 1)")
    if isinstance(life, Weibull):
        return float(life.percentile(share))
    if life.cdf is None:
        raise ValueError("burnout_ceiling needs the life CDF on the renewal curve")
    if life.cdf[-1] < share:
        return float("inf")
    return float(np.interp(share, life.cdf, life.t))  # F is non-decreasing


def plan_block_replacement(
    life: Weibull | RenewalCurve,
    c_group: float,
    c_spot: float,
    *,
    mean_life_h: float | None = None,
    max_interval_h: float | None = None,
    light_floor_h: float | None = None,
    burnout_ceiling: float | None = None,
    rupture_cap_h: float | None = None,
    n: int = 2000,
) -> BlockPlan:
    """Cheapest group relamping interval per position under the team's caps, or spot only."""
    if not (c_spot > 0 and np.isfinite(c_spot)):
        raise ValueError("c_spot must be a positive cost per spot replacement")
    if not (c_group > 0 and np.isfinite(c_group)):
        raise ValueError("c_group must be a positive cost per position per group relamp")
    if isinstance(life, Weibull):
        mu = float(mean_life_h) if mean_life_h is not None else life.mean()
    else:
        if mean_life_h is None:
            raise ValueError("mean_life_h is required when life is a RenewalCurve")
        mu = float(mean_life_h)
    if not mu > 0:
        raise ValueError("mean life must be positive hours")
    spot_rate = c_spot / mu
    notes: list[str] = []

    # Caps, in priority order for ties (safety first).
    caps: list[tuple[str, float]] = []
    if rupture_cap_h is not None:
        if not rupture_cap_h > 0:
            raise ValueError("rupture_cap_h must be positive hours")
        caps.append(("rupture_cap", float(rupture_cap_h)))
    if light_floor_h is not None:
        if not light_floor_h > 0:
            raise ValueError("light_floor_h must be positive hours")
        caps.append(("light_floor", float(light_floor_h)))
    if burnout_ceiling is not None:
        caps.append(("burnout_ceiling", _burnout_interval(life, float(burnout_ceiling))))

    # Horizon: the grid of candidate intervals.
    if isinstance(life, Weibull):
        horizon = (
            float(max_interval_h) if max_interval_h is not None else _DEFAULT_HORIZON_MEANS * mu
        )
        if rupture_cap_h is not None and rupture_cap_h > horizon:
            notes.append(
                f"horizon extended from {horizon:.0f} h to the rupture cap {rupture_cap_h:.0f} h"
            )
            horizon = float(rupture_cap_h)
        if not horizon > 0:
            raise ValueError("max_interval_h must be positive hours")
        curve = weibull_renewal(life.shape, life.scale, horizon, n)
    else:
        curve = life
        horizon = curve.horizon_h
        if max_interval_h is not None:
            horizon = min(horizon, float(max_interval_h))
        if rupture_cap_h is not None and rupture_cap_h > horizon:
            raise ValueError("the renewal curve must reach the rupture cap")

    grid_t = curve.t[1:]
    grid_cost = block_cost_rate(grid_t, curve, c_group, c_spot)
    in_horizon = grid_t <= horizon * (1 + 1e-12)
    g_t = grid_t[in_horizon]
    g_c = grid_cost[in_horizon]

    def cost(x: float) -> float:
        return float((c_group + c_spot * curve.at(x)) / x)

    def minimise_up_to(limit: float) -> tuple[float, float, bool]:
        """Minimum of C over (0, limit]; flag True when it sits at the limit itself."""
        mask = g_t < limit
        cand_t = np.append(g_t[mask], limit)
        cand_c = np.append(g_c[mask], cost(limit))
        k = int(np.argmin(cand_c))
        if k == cand_t.size - 1:
            return limit, float(cand_c[k]), True
        lo = float(cand_t[k - 1]) if k > 0 else 0.5 * float(cand_t[0])
        hi = float(cand_t[k + 1])
        x, c = _refine(cost, lo, hi, float(cand_t[k]), float(cand_c[k]))
        return x, c, x >= limit * (1 - 1e-9)

    # Unconstrained: interior minimum over the whole horizon that beats spot only.
    x_u, c_u, at_end = minimise_up_to(horizon)
    pays = c_u < spot_rate * (1 - _MIN_REL_SAVING)
    unconstrained = x_u if (not at_end and pays) else None
    if at_end:
        notes.append(f"cost rate still falling at the {horizon:.0f} h horizon: no finite optimum")

    cap_name, cap = min(caps, key=lambda c: c[1]) if caps else ("horizon", horizon)
    if cap >= horizon:
        cap_name, cap = "horizon", horizon

    x_c, c_c, at_cap = minimise_up_to(cap)
    binding = cap_name if at_cap else "cost_optimum"
    group_pays = c_c < spot_rate * (1 - _MIN_REL_SAVING) and binding != "horizon"
    if c_group >= c_spot:
        notes.append(
            "group cost per position is not below the spot cost: group relamping cannot pay "
            "on cost (M(T) + 1 >= T / mean life)"
        )
        group_pays = False

    safety_forced = rupture_cap_h is not None
    if not group_pays and not safety_forced:
        return BlockPlan(
            interval_h=None,
            cost_rate=spot_rate,
            spot_only_rate=spot_rate,
            saving_rate=0.0,
            binding="spot_only",
            unconstrained_optimum_h=unconstrained,
            expected_spot_per_position=0.0,
            grid_t=g_t,
            grid_cost=g_c,
            notes=(*notes, "spot replacement only: no group interval costs less"),
            horizon_h=horizon,
        )
    if binding == "horizon":
        # Only reachable with a safety cap at the horizon itself.
        binding = "rupture_cap"
    premium = max(c_c - spot_rate, 0.0)
    if safety_forced and not group_pays:
        notes.append(
            "spot replacement would cost less, but lamps that can rupture must be group "
            "relamped at or before the cap"
        )
    if binding != "cost_optimum" and unconstrained is not None:
        notes.append(f"{binding} limits the interval below the cost optimum {unconstrained:.0f} h")
    return BlockPlan(
        interval_h=x_c,
        cost_rate=c_c,
        spot_only_rate=spot_rate,
        saving_rate=max(spot_rate - c_c, 0.0),
        binding=binding,
        unconstrained_optimum_h=unconstrained,
        expected_spot_per_position=float(curve.at(x_c)),
        grid_t=g_t,
        grid_cost=g_c,
        notes=tuple(notes),
        safety_premium_rate=premium,
        horizon_h=horizon,
    )


# ---------------------------------------------------------------- age replacement


@dataclass(frozen=True, eq=False)
class AgePlan:
    """Age replacement interval (None: run to failure) and cost rates per position-hour."""

    interval_h: float | None
    cost_rate: float
    run_to_failure_rate: float  # c_failure / mean life
    saving_rate: float
    grid_t: FloatArray = field(default_factory=_empty)
    grid_cost: FloatArray = field(default_factory=_empty)


def integrated_survival(T: ArrayLike, life: Weibull) -> FloatArray:
    """∫_0^T S(t) dt in hours for a Weibull, via the regularised lower incomplete gamma."""
    tt = np.maximum(np.asarray(T, dtype=np.float64), 0.0)
    a = 1.0 / life.shape
    out: FloatArray = life.mean() * gammainc(a, np.power(tt / life.scale, life.shape))
    return out


def age_cost_rate(T: ArrayLike, life: Weibull, c_preventive: float, c_failure: float) -> FloatArray:
    """Age replacement cost per burn hour, (c_p·S(T) + c_f·F(T)) / ∫_0^T S."""
    tt = np.asarray(T, dtype=np.float64)
    if np.any(tt <= 0):
        raise ValueError("replacement ages must be positive hours")
    out: FloatArray = (c_preventive * life.sf(tt) + c_failure * life.cdf(tt)) / integrated_survival(
        tt, life
    )
    return out


def plan_age_replacement(
    life: Weibull,
    c_preventive: float,
    c_failure: float,
    *,
    max_interval_h: float | None = None,
    n: int = 2000,
) -> AgePlan:
    """Cheapest replacement age per lamp (Barlow & Proschan), or run to failure."""
    if not (c_preventive > 0 and c_failure > 0):
        raise ValueError("costs must be positive")
    mu = life.mean()
    rtf = c_failure / mu
    horizon = float(max_interval_h) if max_interval_h is not None else _DEFAULT_HORIZON_MEANS * mu
    if not horizon > 0:
        raise ValueError("max_interval_h must be positive hours")
    grid_t = np.linspace(horizon / n, horizon, n)
    grid_cost = age_cost_rate(grid_t, life, c_preventive, c_failure)
    run_to_failure = AgePlan(None, rtf, rtf, 0.0, grid_t, grid_cost)
    if c_preventive >= c_failure:
        return run_to_failure  # replacing a working lamp costs as much as a failure

    k = int(np.argmin(grid_cost))
    if k == n - 1:
        return run_to_failure  # still falling at the horizon: no finite optimum

    def cost(x: float) -> float:
        return float(age_cost_rate(x, life, c_preventive, c_failure))

    lo = float(grid_t[k - 1]) if k > 0 else 0.5 * float(grid_t[0])
    x, c = _refine(cost, lo, float(grid_t[k + 1]), float(grid_t[k]), float(grid_cost[k]))
    if not c < rtf * (1 - _MIN_REL_SAVING):
        return run_to_failure
    return AgePlan(x, c, rtf, rtf - c, grid_t, grid_cost)


# ------------------------------------------------------ cost per megalumen-hour


@dataclass(frozen=True, eq=False)
class MegalumenCost:
    """Block replacement cost per delivered megalumen-hour on a grid of intervals."""

    interval_h: FloatArray  # the requested intervals, hours
    cost_per_mlmh: FloatArray  # money per megalumen-hour at each interval
    mean_light_fraction: FloatArray  # mean light per position over a cycle, share of initial
    best_interval_h: float | None  # minimiser in (0, limit] that beats spot only; None: spot only
    best_cost_per_mlmh: float  # at best_interval_h, or the spot-only figure
    spot_only_cost_per_mlmh: float  # stationary spot-replacement limit
    spot_only_mean_light_fraction: float = 1.0  # stationary mean light under spot only
    limited_interval_h: float = 0.0  # minimiser in (0, limit] whether or not it beats spot only
    limited_cost_per_mlmh: float = 0.0
    at_limit: bool = False  # the minimum over (0, limit] sits at the limit itself
    limit_h: float = 0.0  # max_interval_h, or the renewal curve's horizon
    grid_t: FloatArray = field(default_factory=_empty)  # renewal grid intervals, hours
    grid_cost_per_mlmh: FloatArray = field(default_factory=_empty)


def cost_per_megalumen_hour(
    interval_h: ArrayLike,
    renewal_curve: RenewalCurve,
    c_group: float,
    c_spot: float,
    *,
    lamp_watts: float,
    tariff_per_kwh: float,
    initial_lumens: float,
    lumen_fraction: Callable[[FloatArray], FloatArray],
    survival: Callable[[FloatArray], FloatArray],
    max_interval_h: float | None = None,
) -> MegalumenCost:
    """Cost per delivered megalumen-hour of block replacement (lamp, labour and energy)."""
    # `survival` (age hours -> S) must be the life law the renewal curve was built
    # from; `lumen_fraction` (age hours -> share of initial light) is the lamp's
    # lumen depreciation at the actual voltage. Intervals must lie on the curve.
    # The best interval is searched in (0, max_interval_h] (a cap: light floor, burnout
    # ceiling, rupture cap), on the grid then by a bounded Brent step around the grid minimum.
    if lamp_watts < 0 or tariff_per_kwh < 0 or not initial_lumens > 0:
        raise ValueError("watts and tariff must be >= 0 and initial lumens > 0")
    t = renewal_curve.t
    h = renewal_curve.step_h
    g = np.asarray(survival(t), dtype=np.float64) * np.asarray(lumen_fraction(t), dtype=np.float64)
    dens = renewal_curve.density
    # E[light fraction at t] = g(t) + ∫_0^t m(s) g(t-s) ds, trapezoid rule on the grid.
    conv = np.convolve(dens, g)[: t.size]
    conv = h * (conv - 0.5 * (dens[0] * g + dens * g[0]))
    conv[0] = 0.0
    light_frac = g + conv
    cum_light = np.concatenate(([0.0], np.cumsum(0.5 * h * (light_frac[1:] + light_frac[:-1]))))
    energy_rate = tariff_per_kwh * lamp_watts / 1000.0  # money per burn hour
    tt = t[1:]
    num = c_group + c_spot * renewal_curve.m[1:] + energy_rate * tt
    den = initial_lumens * cum_light[1:] / 1e6  # megalumen-hours per cycle
    grid_cost = num / den

    def at(x: ArrayLike) -> FloatArray:
        xx = np.asarray(x, dtype=np.float64)
        num_x = c_group + c_spot * renewal_curve.at(xx) + energy_rate * xx
        out: FloatArray = num_x / (initial_lumens * np.interp(xx, t, cum_light) / 1e6)
        return out

    # Spot-only limit: stationary age density S(u)/μ, so mean light = ∫ S L / ∫ S
    # (both truncated at the grid horizon, which should span several mean lives).
    s_vals = np.asarray(survival(t), dtype=np.float64)
    int_s = float(np.sum(0.5 * h * (s_vals[1:] + s_vals[:-1])))
    int_g = float(np.sum(0.5 * h * (g[1:] + g[:-1])))
    spot_light = int_g / int_s
    spot_cost = (c_spot / int_s + energy_rate) / (initial_lumens * spot_light / 1e6)

    horizon = float(t[-1])
    limit = horizon if max_interval_h is None else min(float(max_interval_h), horizon)
    if not limit > 0:
        raise ValueError("max_interval_h must be positive hours")
    mask = tt < limit
    cand_t = np.append(tt[mask], limit)
    cand_c = np.append(grid_cost[mask], float(at(limit)))
    k = int(np.argmin(cand_c))
    at_limit = k == cand_t.size - 1
    lim_t, lim_c = float(cand_t[k]), float(cand_c[k])
    if not at_limit:
        lo = float(cand_t[k - 1]) if k > 0 else 0.5 * float(cand_t[0])
        lim_t, lim_c = _refine(lambda v: float(at(v)), lo, float(cand_t[k + 1]), lim_t, lim_c)
        at_limit = lim_t >= limit * (1 - 1e-9)

    best: float | None = lim_t
    best_cost = lim_c
    no_finite_optimum = at_limit and limit >= horizon * (1 - 1e-12)
    if no_finite_optimum or best_cost >= spot_cost * (1 - _MIN_REL_SAVING):
        best, best_cost = None, spot_cost

    x = np.asarray(interval_h, dtype=np.float64)
    if np.any(x <= 0) or np.any(x > t[-1]):
        raise ValueError("intervals must lie in (0, renewal curve horizon]")
    return MegalumenCost(
        interval_h=x,
        cost_per_mlmh=at(x),
        mean_light_fraction=np.interp(x, t, cum_light) / x,
        best_interval_h=best,
        best_cost_per_mlmh=best_cost,
        spot_only_cost_per_mlmh=spot_cost,
        spot_only_mean_light_fraction=spot_light,
        limited_interval_h=lim_t,
        limited_cost_per_mlmh=lim_c,
        at_limit=at_limit,
        limit_h=limit,
        grid_t=tt,
        grid_cost_per_mlmh=grid_cost,
    )
