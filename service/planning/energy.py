"""Energy and light view of a group plan: cost per delivered megalumen-hour (numeric core calls).

Per lamp type in an area, at the area's operating voltage and the site's tariff:
- lamp watts W = rated watts x power factor at the operating voltage (conditions.voltage_effect:
  filament V^1.6, reactor and regulating ballasts by their gain, flat for electronic and LED);
- energy cost per position per burn hour = tariff x W / 1000; per year x burn hours a year
  (with prompt spot replacement every position burns throughout, under any interval);
- initial light Phi0 = catalogue initial lumens x light factor at the operating voltage. When
  the catalogue gives none, ASSUMPTION: rated watts x DEFAULT_EFFICACY_LM_PER_W[technology]
  (lumen.py), labelled "assumed_efficacy". Phi0 multiplies every megalumen figure by the same
  factor, so the interval that minimises cost per megalumen-hour does not depend on it;
- lumen depreciation L(t): the lamp's curve (hours, or fractions of the voltage-scaled B50 life
  for rated-life curves, as engine.light_floor_hours), times the luminaire dirt factor of the
  area (planning/maintained.py: the plans' and forecasts' one maintained-light definition,
  reliability/dirt.maintained_light; under spot replacement only, the long-run mean factor);
- cost per megalumen-hour, the mean light fraction over a cycle and the spot-only figures:
  replacement.cost_per_megalumen_hour on the plan's renewal grid [Cox, renewal argument; see
  that module], the best interval searched under the same caps as the cost plan (light floor,
  burnout ceiling, rupture cap).

Objective "cost_per_megalumen_hour" (what-if only) makes that interval the plan's: binding is
"megalumen_optimum" for an interior minimum, the cap's name when a cap holds it, "spot_only"
when no interval beats spot replacement per megalumen-hour (lamps that can rupture are still
relamped at or before the cap). The cost rate, saving and spot count are those of the chosen
interval on the same renewal curve (replacement.block_cost_rate).
"""

from __future__ import annotations

import math
from collections.abc import Hashable
from dataclasses import dataclass

import numpy as np

from service.catalogue.lamp_model import LampModel
from service.planning.group_plan import (
    Conditions,
    CostInputs,
    GroupPlan,
    weibull_renewal_scaled,
)
from service.planning.maintained import luminaire_factor_in_cycle, spot_only_luminaire_factor
from service.reliability.lumen import DEFAULT_EFFICACY_LM_PER_W
from service.reliability.megalumen import (
    DeliveredLight,
    MegalumenCost,
    cost_per_megalumen_hour_of,
    delivered_light,
)
from service.reliability.renewal import RenewalCurve
from service.reliability.replacement import BlockPlan, block_cost_rate

COST = "cost"
MEGALUMEN = "cost_per_megalumen_hour"
OBJECTIVES: tuple[str, ...] = (COST, MEGALUMEN)
_LN2 = math.log(2.0)


@dataclass(frozen=True)
class EnergyView:
    """Energy and delivered light of one lamp type's plan (money in the site currency)."""

    lamp_watts: float  # at the operating voltage
    power_factor: float
    light_factor: float
    energy_per_burn_hour: float  # per position
    initial_lumens: float  # at the operating voltage
    initial_lumens_basis: str  # "catalogue" or "assumed_efficacy"
    assumed_efficacy_lm_per_w: float | None
    interval_h: float | None  # the plan's interval (None: spot only)
    mean_light_fraction: float  # over interval_h, or the stationary spot-only figure
    cost_per_mlmh: float  # at interval_h, or the spot-only figure
    spot_only_mean_light_fraction: float
    spot_only_cost_per_mlmh: float
    cost_optimum_interval_h: float | None  # the cost objective's interval
    cost_per_mlmh_at_cost_optimum: float
    best_interval_h: float | None  # minimiser of cost per Mlm.h under the caps; None: spot only
    best_binding: str
    best_cost_per_mlmh: float
    note: str | None


@dataclass(frozen=True)
class _Setup:
    curve: RenewalCurve
    limit_name: str
    limit_h: float | None
    lumens: float
    basis: str
    efficacy: float | None
    watts: float


def _setup(model: LampModel, cond: Conditions, gp: GroupPlan) -> _Setup:
    curve = weibull_renewal_scaled(gp.life, gp.horizon_h or 3.0 * gp.life.mean())
    caps: list[tuple[str, float]] = []
    if gp.rupture_cap_h is not None:
        caps.append(("rupture_cap", gp.rupture_cap_h))
    if gp.light_floor_h is not None:
        caps.append(("light_floor", gp.light_floor_h))
    if cond.burnout_ceiling is not None:
        caps.append(("burnout_ceiling", float(gp.life.percentile(cond.burnout_ceiling))))
    name, limit = min(caps, key=lambda c: c[1]) if caps else ("horizon", None)
    if limit is not None and limit >= float(curve.t[-1]):
        name, limit = "horizon", None
    if model.initial_lumens is not None:
        rated_lm, basis, eff = model.initial_lumens, "catalogue", None
    else:
        eff = DEFAULT_EFFICACY_LM_PER_W[model.technology]
        rated_lm, basis = model.rated_watts * eff, "assumed_efficacy"
    return _Setup(
        curve,
        name,
        limit,
        rated_lm * gp.light_factor,
        basis,
        eff,
        model.rated_watts * gp.power_factor,
    )


# Delivered light by what it reads (life, horizon, lumen curve, dirt, weekly hours): one
# body's views share each convolution (plan_views.py); None computes it afresh.
Lights = dict[Hashable, DeliveredLight]


def _light(
    model: LampModel, cond: Conditions, gp: GroupPlan, st: _Setup, lights: Lights | None
) -> DeliveredLight:
    dirt, weekly_h = cond.dirt, cond.weekly_burn_hours
    life_h = gp.life.scale * _LN2 ** (1.0 / gp.life.shape)  # effective B50, hours
    curve_life = None if model.lumen_curve.basis == "hours" else life_h
    key = (gp.life, gp.horizon_h, id(model.lumen_curve), curve_life, dirt, weekly_h)
    if lights is not None and key in lights:
        return lights[key]
    light = delivered_light(
        st.curve,
        lumen_fraction=lambda u: model.lumen_curve.at(u, curve_life),
        survival=gp.life.sf,
        luminaire_factor=lambda t: luminaire_factor_in_cycle(dirt, t, weekly_h),
    )
    if lights is not None:
        lights[key] = light
    return light


def _megalumen(
    model: LampModel,
    costs: CostInputs,
    cond: Conditions,
    gp: GroupPlan,
    st: _Setup,
    intervals: list[float],
    lights: Lights | None = None,
) -> MegalumenCost:
    horizon = float(st.curve.t[-1])
    return cost_per_megalumen_hour_of(
        np.minimum(np.asarray(intervals, dtype=np.float64), horizon),
        _light(model, cond, gp, st, lights),
        costs.c_group,
        costs.c_spot,
        lamp_watts=st.watts,
        tariff_per_kwh=costs.energy_price_per_kwh,
        initial_lumens=st.lumens,
        max_interval_h=st.limit_h,
        spot_luminaire_factor=spot_only_luminaire_factor(cond.dirt, cond.weekly_burn_hours),
    )


def _best(mc: MegalumenCost, st: _Setup, safety_forced: bool) -> tuple[float | None, str, float]:
    """The megalumen objective's interval, binding and cost per Mlm.h under the caps."""
    if mc.best_interval_h is not None:
        binding = st.limit_name if mc.at_limit else "megalumen_optimum"
        return mc.best_interval_h, binding, mc.best_cost_per_mlmh
    if safety_forced:  # lamps that can rupture: the best interval at or below the caps
        binding = st.limit_name if mc.at_limit else "megalumen_optimum"
        return mc.limited_interval_h, binding, mc.limited_cost_per_mlmh
    return None, "spot_only", mc.spot_only_cost_per_mlmh


def energy_view(
    model: LampModel,
    costs: CostInputs,
    cond: Conditions,
    gp: GroupPlan,
    lights: Lights | None = None,
) -> EnergyView:
    """Energy cost, mean light and cost per megalumen-hour at the plan's and the best interval."""
    st = _setup(model, cond, gp)
    cost_plan = gp.cost_plan or gp.plan
    chosen, cost_t = gp.plan.interval_h, cost_plan.interval_h
    probe = [v for v in (chosen, cost_t) if v is not None] or [float(st.curve.t[1])]
    mc = _megalumen(model, costs, cond, gp, st, probe, lights)
    best_t, binding, best_c = _best(mc, st, gp.rupture_cap_h is not None)
    at = dict(zip(probe, range(len(probe)), strict=False))

    def light(t: float | None) -> float:
        return (
            mc.spot_only_mean_light_fraction if t is None else float(mc.mean_light_fraction[at[t]])
        )

    def per_mlmh(t: float | None) -> float:
        return mc.spot_only_cost_per_mlmh if t is None else float(mc.cost_per_mlmh[at[t]])

    note = None
    if (best_t is None) != (cost_t is None) or (
        best_t is not None and cost_t is not None and abs(best_t - cost_t) > 1e-6 * cost_t
    ):
        fmt = "spot only" if best_t is None else f"{best_t:.0f} h"
        cfmt = "spot only" if cost_t is None else f"{cost_t:.0f} h"
        note = (
            f"cost per megalumen-hour is lowest at {fmt}, the cost optimum is {cfmt}: energy "
            "and light loss favour a different interval than lamp and labour costs alone"
        )
    return EnergyView(
        lamp_watts=st.watts,
        power_factor=gp.power_factor,
        light_factor=gp.light_factor,
        energy_per_burn_hour=costs.energy_per_burn_hour(gp.power_factor),
        initial_lumens=st.lumens,
        initial_lumens_basis=st.basis,
        assumed_efficacy_lm_per_w=st.efficacy,
        interval_h=chosen,
        mean_light_fraction=light(chosen),
        cost_per_mlmh=per_mlmh(chosen),
        spot_only_mean_light_fraction=mc.spot_only_mean_light_fraction,
        spot_only_cost_per_mlmh=mc.spot_only_cost_per_mlmh,
        cost_optimum_interval_h=cost_t,
        cost_per_mlmh_at_cost_optimum=per_mlmh(cost_t),
        best_interval_h=best_t,
        best_binding=binding,
        best_cost_per_mlmh=best_c,
        note=note,
    )


def megalumen_plan(
    model: LampModel, costs: CostInputs, cond: Conditions, gp: GroupPlan
) -> GroupPlan:
    """The group plan with its interval chosen by cost per megalumen-hour (caps still hold)."""
    st = _setup(model, cond, gp)
    mc = _megalumen(model, costs, cond, gp, st, [float(st.curve.t[1])])
    best_t, binding, _ = _best(mc, st, gp.rupture_cap_h is not None)
    base = gp.plan
    notes = [f"objective: cost per megalumen-hour (the cost objective gives {_fmt(base)})"]
    if best_t is None:
        plan = BlockPlan(
            interval_h=None,
            cost_rate=base.spot_only_rate,
            spot_only_rate=base.spot_only_rate,
            saving_rate=0.0,
            binding="spot_only",
            unconstrained_optimum_h=None,
            expected_spot_per_position=0.0,
            grid_t=base.grid_t,
            grid_cost=base.grid_cost,
            notes=(*notes, "spot replacement only: no group interval costs less per Mlm.h"),
            horizon_h=base.horizon_h,
        )
    else:
        rate = float(block_cost_rate(best_t, st.curve, costs.c_group, costs.c_spot))
        extra = rate - base.spot_only_rate
        if extra > 0:
            notes.append(
                f"this interval costs {extra:.3g} more per position-hour than spot only; "
                "it buys more light per unit of money spent"
            )
        plan = BlockPlan(
            interval_h=best_t,
            cost_rate=rate,
            spot_only_rate=base.spot_only_rate,
            saving_rate=max(-extra, 0.0),
            binding=binding,
            unconstrained_optimum_h=best_t if binding == "megalumen_optimum" else None,
            expected_spot_per_position=float(st.curve.at(best_t)),
            grid_t=base.grid_t,
            grid_cost=base.grid_cost,
            notes=tuple(notes),
            safety_premium_rate=max(extra, 0.0) if gp.rupture_cap_h is not None else 0.0,
            horizon_h=base.horizon_h,
        )
    return GroupPlan(
        plan,
        gp.life,
        gp.life_factor,
        gp.voltage_life_factor,
        gp.switching_factor,
        gp.light_floor_h,
        gp.rupture_cap_h,
        gp.warnings,
        power_factor=gp.power_factor,
        light_factor=gp.light_factor,
        horizon_h=gp.horizon_h,
        objective=MEGALUMEN,
        cost_plan=base,
    )


def _fmt(p: BlockPlan) -> str:
    return "spot only" if p.interval_h is None else f"{p.interval_h:.0f} h ({p.binding})"
