"""Group (block) replacement intervals, with the constraints a team sets.

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

Cost per delivered megalumen-hour is in megalumen.py (it shares this module's search
helper).
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike, NDArray
from scipy.optimize import minimize_scalar

from service.reliability.renewal import RenewalCurve, weibull_renewal
from service.reliability.weibull import Weibull

FloatArray = NDArray[np.float64]

# A group plan must beat spot replacement by more than this share of the spot
# rate: it keeps rounding noise in M(T) from turning "spot only" into a plan.
MIN_REL_SAVING = 1e-6
DEFAULT_HORIZON_MEANS = 3.0  # default longest interval, in mean lives


def empty_grid() -> FloatArray:
    """An empty float array (default for result grids)."""
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


def refine_minimum(
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


def _check_costs(c_group: float, c_spot: float) -> None:
    if not (c_spot > 0 and np.isfinite(c_spot)):
        raise ValueError("c_spot must be a positive cost per spot replacement")
    if not (c_group > 0 and np.isfinite(c_group)):
        raise ValueError("c_group must be a positive cost per position per group relamp")


def _mean_life(life: Weibull | RenewalCurve, mean_life_h: float | None) -> float:
    if isinstance(life, Weibull):
        mu = float(mean_life_h) if mean_life_h is not None else life.mean()
    else:
        if mean_life_h is None:
            raise ValueError("mean_life_h is required when life is a RenewalCurve")
        mu = float(mean_life_h)
    if not mu > 0:
        raise ValueError("mean life must be positive hours")
    return mu


def _caps(
    life: Weibull | RenewalCurve,
    light_floor_h: float | None,
    burnout_ceiling: float | None,
    rupture_cap_h: float | None,
) -> list[tuple[str, float]]:
    """The team's upper limits on T, in priority order for ties (safety first)."""
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
    return caps


def _renewal_and_horizon(
    life: Weibull | RenewalCurve,
    mu: float,
    max_interval_h: float | None,
    rupture_cap_h: float | None,
    n: int,
) -> tuple[RenewalCurve, float, list[str]]:
    """The renewal curve, the longest interval considered (hours) and a note if extended."""
    notes: list[str] = []
    if not isinstance(life, Weibull):
        horizon = life.horizon_h
        if max_interval_h is not None:
            horizon = min(horizon, float(max_interval_h))
        if rupture_cap_h is not None and rupture_cap_h > horizon:
            raise ValueError("the renewal curve must reach the rupture cap")
        return life, horizon, notes
    horizon = float(max_interval_h) if max_interval_h is not None else DEFAULT_HORIZON_MEANS * mu
    if rupture_cap_h is not None and rupture_cap_h > horizon:
        notes.append(
            f"horizon extended from {horizon:.0f} h to the rupture cap {rupture_cap_h:.0f} h"
        )
        horizon = float(rupture_cap_h)
    if not horizon > 0:
        raise ValueError("max_interval_h must be positive hours")
    return weibull_renewal(life.shape, life.scale, horizon, n), horizon, notes


def _minimise_up_to(
    g_t: FloatArray, g_c: FloatArray, cost: Callable[[float], float], limit: float
) -> tuple[float, float, bool]:
    """Minimum of C over (0, limit]; flag True when it sits at the limit itself."""
    mask = g_t < limit
    cand_t = np.append(g_t[mask], limit)
    cand_c = np.append(g_c[mask], cost(limit))
    k = int(np.argmin(cand_c))
    if k == cand_t.size - 1:
        return limit, float(cand_c[k]), True
    lo = float(cand_t[k - 1]) if k > 0 else 0.5 * float(cand_t[0])
    hi = float(cand_t[k + 1])
    x, c = refine_minimum(cost, lo, hi, float(cand_t[k]), float(cand_c[k]))
    return x, c, x >= limit * (1 - 1e-9)


def _tightest(caps: list[tuple[str, float]], horizon: float) -> tuple[str, float]:
    """The lowest cap (first listed on ties), or the horizon when none is below it."""
    cap_name, cap = min(caps, key=lambda c: c[1]) if caps else ("horizon", horizon)
    if cap >= horizon:
        return "horizon", horizon
    return cap_name, cap


@dataclass(frozen=True, kw_only=True)
class Searched:
    """One problem's two minimisations (over the horizon, and up to the tightest cap)."""

    c_group: float
    c_spot: float
    spot_rate: float  # c_spot / mean life
    horizon: float  # hours
    rupture_cap_h: float | None
    notes: list[str]
    g_t: FloatArray  # candidate intervals in the horizon, hours
    g_c: FloatArray  # C(T) on g_t
    unconstrained: tuple[float, float, bool]  # (T, C, at the horizon)
    cap_name: str
    constrained: tuple[float, float, bool]  # (T, C, at the cap)
    expected_spot: float  # M at the constrained T


def _decide(s: Searched) -> BlockPlan:
    """The plan from the two minimisations: spot only, the cost optimum or a binding cap."""
    notes = list(s.notes)
    x_u, c_u, at_end = s.unconstrained
    pays = c_u < s.spot_rate * (1 - MIN_REL_SAVING)
    unconstrained = x_u if (not at_end and pays) else None
    if at_end:
        notes.append(f"cost rate still falling at the {s.horizon:.0f} h horizon: no finite optimum")
    x_c, c_c, at_cap = s.constrained
    binding = s.cap_name if at_cap else "cost_optimum"
    group_pays = c_c < s.spot_rate * (1 - MIN_REL_SAVING) and binding != "horizon"
    if s.c_group >= s.c_spot:
        notes.append(
            "group cost per position is not below the spot cost: group relamping cannot pay "
            "on cost (M(T) + 1 >= T / mean life)"
        )
        group_pays = False
    safety_forced = s.rupture_cap_h is not None
    if not group_pays and not safety_forced:
        return BlockPlan(
            interval_h=None,
            cost_rate=s.spot_rate,
            spot_only_rate=s.spot_rate,
            saving_rate=0.0,
            binding="spot_only",
            unconstrained_optimum_h=unconstrained,
            expected_spot_per_position=0.0,
            grid_t=s.g_t,
            grid_cost=s.g_c,
            notes=(*notes, "spot replacement only: no group interval costs less"),
            horizon_h=s.horizon,
        )
    if binding == "horizon":
        # Only reachable with a safety cap at the horizon itself.
        binding = "rupture_cap"
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
        spot_only_rate=s.spot_rate,
        saving_rate=max(s.spot_rate - c_c, 0.0),
        binding=binding,
        unconstrained_optimum_h=unconstrained,
        expected_spot_per_position=s.expected_spot,
        grid_t=s.g_t,
        grid_cost=s.g_c,
        notes=tuple(notes),
        safety_premium_rate=max(c_c - s.spot_rate, 0.0),
        horizon_h=s.horizon,
    )


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
    _check_costs(c_group, c_spot)
    mu = _mean_life(life, mean_life_h)
    caps = _caps(life, light_floor_h, burnout_ceiling, rupture_cap_h)
    curve, horizon, notes = _renewal_and_horizon(life, mu, max_interval_h, rupture_cap_h, n)
    grid_t = curve.t[1:]
    grid_cost = block_cost_rate(grid_t, curve, c_group, c_spot)
    in_horizon = grid_t <= horizon * (1 + 1e-12)
    g_t, g_c = grid_t[in_horizon], grid_cost[in_horizon]

    def cost(x: float) -> float:
        return (c_group + c_spot * curve.at_scalar(float(x))) / x

    cap_name, cap = _tightest(caps, horizon)
    constrained = _minimise_up_to(g_t, g_c, cost, cap)
    searched = Searched(
        c_group=c_group,
        c_spot=c_spot,
        spot_rate=c_spot / mu,
        horizon=horizon,
        rupture_cap_h=rupture_cap_h,
        notes=notes,
        g_t=g_t,
        g_c=g_c,
        unconstrained=_minimise_up_to(g_t, g_c, cost, horizon),
        cap_name=cap_name,
        constrained=constrained,
        expected_spot=float(curve.at(constrained[0])),
    )
    return _decide(searched)
