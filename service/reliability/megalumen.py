"""Cost per delivered megalumen-hour (alternative block objective). With prompt
spot replacement every position burns throughout, so a cycle of length T costs
c_group + c_spot·M(T) + tariff·W·T/1000 (W lamp watts at the actual voltage).
The expected relative light of a position at group age t follows from the
renewal argument [Cox, ch. 4]: the lamp burning there is either the original one
(probability S(t), light L(t)) or was installed at the last renewal s < t
(renewal density m(s)) and has survived t - s since, so

    E[light fraction at t] = S(t)·L(t) + ∫_0^t m(s) S(t-s) L(t-s) ds,

which is exactly 1 when L ≡ 1 (a lamp is always burning). Luminaire dirt multiplies it by
the luminaire maintenance factor at the cycle's calendar time (a group visit cleans every
luminaire at once, whatever the age of the lamp in it): maintained light =
dirt.maintained_light(E[lamp light], 1, LMF(t)), the one definition of maintained light
(the voltage light factor is in Φ0) [published: CIE 97:2005 maintenance factor method]. Delivered light over
the cycle is Φ0 ∫_0^T E[...] dt (Φ0 initial lumens at the actual voltage). The
only approximation is the numerical convolution on the renewal grid (trapezoid
rule); lamp power is taken as constant over life. Spot replacement alone is the
stationary limit: each position holds a lamp of age u with density S(u)/μ
(renewal-reward, equilibrium age), so the mean light is ∫S·L/∫S and the cost per
megalumen-hour (c_spot/μ + energy rate) / (Φ0 · LMF_spot · ∫S·L/∫S), LMF_spot the caller's
long-run luminaire factor without group visits (1 = clean luminaires). The best interval is the
minimiser over (0, cap] (the caps as above); "spot only" when it does not beat the
spot-only figure or when the cost per megalumen-hour still falls at the horizon.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass, field

import numpy as np
from numpy.typing import ArrayLike, NDArray

from service.reliability.dirt import maintained_light
from service.reliability.renewal import RenewalCurve
from service.reliability.replacement import MIN_REL_SAVING, empty_grid, refine_minimum

FloatArray = NDArray[np.float64]


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
    grid_t: FloatArray = field(default_factory=empty_grid)  # renewal grid intervals, hours
    grid_cost_per_mlmh: FloatArray = field(default_factory=empty_grid)


@dataclass(frozen=True, kw_only=True)
class _Costing:
    """Cost per megalumen-hour of one lamp type's block replacement, at any interval."""

    curve: RenewalCurve
    cum_light: FloatArray  # ∫_0^t E[light fraction] on the curve's grid, hours
    c_group: float
    c_spot: float
    energy_rate: float  # money per burn hour
    initial_lumens: float

    def at(self, x: ArrayLike) -> FloatArray:
        """(c_group + c_spot·M(x) + energy·x) / megalumen-hours delivered in (0, x]."""
        xx = np.asarray(x, dtype=np.float64)
        num = self.c_group + self.c_spot * self.curve.at(xx) + self.energy_rate * xx
        out: FloatArray = num / (
            self.initial_lumens * np.interp(xx, self.curve.t, self.cum_light) / 1e6
        )
        return out


def _cumulative_light(curve: RenewalCurve, g: FloatArray, lmf: FloatArray) -> FloatArray:
    """∫_0^t E[light], E[light at t] = LMF(t)·(g(t) + ∫_0^t m(s) g(t-s) ds)."""
    h = curve.step_h
    dens = curve.density
    # The renewal convolution by the trapezoid rule on the grid.
    conv = np.convolve(dens, g)[: curve.t.size]
    conv = h * (conv - 0.5 * (dens[0] * g + dens * g[0]))
    conv[0] = 0.0
    light_frac = maintained_light(g + conv, 1.0, lmf)
    return np.concatenate(([0.0], np.cumsum(0.5 * h * (light_frac[1:] + light_frac[:-1]))))


@dataclass(frozen=True, eq=False)
class DeliveredLight:
    """What the cost per megalumen-hour reads of a life law, lumen curve and dirt (no costs)."""

    curve: RenewalCurve
    cum_light: FloatArray  # ∫_0^t E[light fraction] on the curve's grid, hours
    int_s: float  # ∫ S over the grid, hours (the truncated mean life)
    int_g: float  # ∫ S·L over the grid, hours


def delivered_light(
    renewal_curve: RenewalCurve,
    *,
    lumen_fraction: Callable[[FloatArray], FloatArray],
    survival: Callable[[FloatArray], FloatArray],
    luminaire_factor: Callable[[FloatArray], FloatArray] | None = None,
) -> DeliveredLight:
    """The renewal convolution and light integrals, shared by every cost set on this light."""
    # Views differing only in prices, watts, lumens or caps read the same arrays, so one
    # convolution serves them all (cost_per_megalumen_hour_of).
    t = renewal_curve.t
    s_vals = np.asarray(survival(t), dtype=np.float64)
    g = s_vals * np.asarray(lumen_fraction(t), dtype=np.float64)
    lmf = np.ones_like(t) if luminaire_factor is None else np.asarray(luminaire_factor(t), float)
    # Stationary age density S(u)/μ, so mean light = ∫ S L / ∫ S (both truncated at the
    # grid horizon, which should span several mean lives).
    h = renewal_curve.step_h
    return DeliveredLight(
        curve=renewal_curve,
        cum_light=_cumulative_light(renewal_curve, g, lmf),
        int_s=float(np.sum(0.5 * h * (s_vals[1:] + s_vals[:-1]))),
        int_g=float(np.sum(0.5 * h * (g[1:] + g[:-1]))),
    )


def _spot_only(c: _Costing, light: DeliveredLight, lmf_spot: float) -> tuple[float, float]:
    """Spot-only cost per megalumen-hour and mean light fraction."""
    int_s = light.int_s
    spot_light = float(maintained_light(light.int_g / int_s, 1.0, lmf_spot))
    return (c.c_spot / int_s + c.energy_rate) / (c.initial_lumens * spot_light / 1e6), spot_light


def _best_within(
    c: _Costing, tt: FloatArray, grid_cost: FloatArray, limit: float
) -> tuple[float, float, bool]:
    """The cheapest interval in (0, limit]: grid minimum, then a bounded Brent step."""
    mask = tt < limit
    cand_t = np.append(tt[mask], limit)
    cand_c = np.append(grid_cost[mask], float(c.at(limit)))
    k = int(np.argmin(cand_c))
    at_limit = k == cand_t.size - 1
    lim_t, lim_c = float(cand_t[k]), float(cand_c[k])
    if not at_limit:
        lo = float(cand_t[k - 1]) if k > 0 else 0.5 * float(cand_t[0])
        lim_t, lim_c = refine_minimum(
            lambda v: float(c.at(v)), lo, float(cand_t[k + 1]), lim_t, lim_c
        )
        at_limit = lim_t >= limit * (1 - 1e-9)
    return lim_t, lim_c, at_limit


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
    luminaire_factor: Callable[[FloatArray], FloatArray] | None = None,
    spot_luminaire_factor: float = 1.0,
) -> MegalumenCost:
    """Cost per delivered megalumen-hour of block replacement (lamp, labour and energy)."""
    # `survival` (age hours -> S) must be the life law the renewal curve was built
    # from; `lumen_fraction` (age hours -> share of initial light) is the lamp's
    # lumen depreciation at the actual voltage. Intervals must lie on the curve.
    # The best interval is searched in (0, max_interval_h] (a cap: light floor, burnout
    # ceiling, rupture cap), on the grid then by a bounded Brent step around the grid minimum.
    # `luminaire_factor` (burn hours since the group visit -> LMF) is the dirt; None = clean.
    _check(lamp_watts, tariff_per_kwh, initial_lumens, spot_luminaire_factor)
    light = delivered_light(
        renewal_curve,
        lumen_fraction=lumen_fraction,
        survival=survival,
        luminaire_factor=luminaire_factor,
    )
    return cost_per_megalumen_hour_of(
        interval_h,
        light,
        c_group,
        c_spot,
        lamp_watts=lamp_watts,
        tariff_per_kwh=tariff_per_kwh,
        initial_lumens=initial_lumens,
        max_interval_h=max_interval_h,
        spot_luminaire_factor=spot_luminaire_factor,
    )


def _check(
    lamp_watts: float, tariff_per_kwh: float, initial_lumens: float, spot_factor: float
) -> None:
    if lamp_watts < 0 or tariff_per_kwh < 0 or not initial_lumens > 0:
        raise ValueError("watts and tariff must be >= 0 and initial lumens > 0")
    if not 0 < spot_factor <= 1:
        raise ValueError("spot_luminaire_factor must be in (0, 1]")


def cost_per_megalumen_hour_of(
    interval_h: ArrayLike,
    light: DeliveredLight,
    c_group: float,
    c_spot: float,
    *,
    lamp_watts: float,
    tariff_per_kwh: float,
    initial_lumens: float,
    max_interval_h: float | None = None,
    spot_luminaire_factor: float = 1.0,
) -> MegalumenCost:
    """cost_per_megalumen_hour on a light computed already (delivered_light)."""
    _check(lamp_watts, tariff_per_kwh, initial_lumens, spot_luminaire_factor)
    renewal_curve = light.curve
    t = renewal_curve.t
    c = _Costing(
        curve=renewal_curve,
        cum_light=light.cum_light,
        c_group=c_group,
        c_spot=c_spot,
        energy_rate=tariff_per_kwh * lamp_watts / 1000.0,
        initial_lumens=initial_lumens,
    )
    tt = t[1:]
    num = c_group + c_spot * renewal_curve.m[1:] + c.energy_rate * tt
    grid_cost = num / (initial_lumens * c.cum_light[1:] / 1e6)  # per megalumen-hour
    spot_cost, spot_light = _spot_only(c, light, spot_luminaire_factor)
    horizon = float(t[-1])
    limit = horizon if max_interval_h is None else min(float(max_interval_h), horizon)
    if not limit > 0:
        raise ValueError("max_interval_h must be positive hours")
    lim_t, lim_c, at_limit = _best_within(c, tt, grid_cost, limit)
    best: float | None = lim_t
    best_cost = lim_c
    no_finite_optimum = at_limit and limit >= horizon * (1 - 1e-12)
    if no_finite_optimum or best_cost >= spot_cost * (1 - MIN_REL_SAVING):
        best, best_cost = None, spot_cost
    x = np.asarray(interval_h, dtype=np.float64)
    if np.any(x <= 0) or np.any(x > t[-1]):
        raise ValueError("intervals must lie in (0, renewal curve horizon]")
    return MegalumenCost(
        interval_h=x,
        cost_per_mlmh=c.at(x),
        mean_light_fraction=np.interp(x, t, c.cum_light) / x,
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
