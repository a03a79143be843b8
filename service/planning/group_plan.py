"""Per-position costs and the group interval for one lamp type in one area (numeric core calls).

Costs per position, in the site's currency:
- c_group = lamp price + group minutes/60 x labour rate + the area's equipment hire for
  one visit shared over all the area's positions + disposal fee if the lamp holds mercury;
- c_spot = lamp price + spot minutes/60 x labour rate + equipment hire for one visit per
  spot replacement + disposal fee. ASSUMPTION: each burnout is its own visit (no sharing
  of hire between spot lamps); spot_lamps_per_visit overrides it (the hire is then shared).
Energy does not change the group interval under the cost objective (with prompt spot
replacement every socket burns all the time either way); it is reported as an input, at the
lamp's power at the operating voltage (rated watts x the voltage power factor). The cost per
delivered megalumen-hour, which energy and light loss do change, is planning/energy.py.

Life: the lamp model's Weibull (shape, scale at rated volts and cycle) scaled by the voltage
life factor (conditions.voltage_effect) and the switching factor
(conditions.switching_life_factor): accelerated-failure-time scaling, shape unchanged.
Light floor hours: first burn hours at which maintained light (planning/maintained.py: lamp
lumen depreciation x luminaire dirt x voltage light factor, the forecasts' definition) falls
to the floor (fraction of rated initial light). A group visit that cleans adds the cleaning
labour per position to c_group. Rupture cap (lamps with rupture risk):
fraction x min(rated life, rated life x life factor): at or before rated life even when a
low supply voltage stretches life, 0.7 by default [practice: common practice].
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass, field
from functools import lru_cache
from typing import Any

import numpy as np

from service.catalogue.lamp_model import LampModel
from service.planning.maintained import FloorCase, floor_hours, floor_hours_many
from service.reliability.block_batch import ScaledProblems, plan_block_replacement_scaled
from service.reliability.conditions import (
    VoltageEffect,
    needs_words,
    switching_life_factor,
    voltage_effect,
    voltage_model,
)
from service.reliability.dirt import DirtRegime
from service.reliability.renewal import RenewalCurve, weibull_renewal
from service.reliability.replacement import BlockPlan, plan_block_replacement
from service.reliability.weibull import Weibull

DEFAULT_RUPTURE_FRACTION = 0.7  # [practice] common practice: group relamp metal halide near 70 %
HORIZON_MEANS = 3.0  # longest interval considered, in mean lives (the core's default)
RENEWAL_STEPS = 2000  # renewal grid steps (the core's default)
_LN2 = math.log(2.0)


@dataclass(frozen=True)
class CostInputs:
    """What one position costs to relamp, and the parts the sum came from (currency)."""

    lamp_price: float
    labour_rate_per_h: float
    group_minutes_per_lamp: float
    spot_minutes_per_lamp: float
    equipment_hire_per_visit: float
    area_positions: int
    spot_lamps_per_visit: float
    disposal_fee_per_lamp: float  # charged only for mercury lamps
    energy_price_per_kwh: float
    lamp_watts: float  # rated lamp watts (the plan scales them by GroupPlan.power_factor)
    cleaning_labour_per_position: float = 0.0  # cleaning the area's fixtures, per position
    relamp_cleans: bool = False  # whether the group visit includes that cleaning

    @property
    def cleaning_per_position(self) -> float:
        """Cleaning labour in c_group: only when the group visit includes cleaning."""
        return self.cleaning_labour_per_position if self.relamp_cleans else 0.0

    @property
    def group_labour(self) -> float:
        """Labour per position in a group relamp."""
        return self.group_minutes_per_lamp / 60.0 * self.labour_rate_per_h

    @property
    def spot_labour(self) -> float:
        """Labour per spot replacement."""
        return self.spot_minutes_per_lamp / 60.0 * self.labour_rate_per_h

    @property
    def group_equipment_share(self) -> float:
        """Equipment hire per position of one group visit."""
        return self.equipment_hire_per_visit / max(self.area_positions, 1)

    @property
    def spot_equipment(self) -> float:
        """Equipment hire per spot replacement."""
        return self.equipment_hire_per_visit / max(self.spot_lamps_per_visit, 1e-9)

    @property
    def c_group(self) -> float:
        """Cost per position of a group relamp."""
        return (self.lamp_price + self.group_labour + self.group_equipment_share) + (
            self.disposal_fee_per_lamp + self.cleaning_per_position
        )

    @property
    def c_spot(self) -> float:
        """Cost of one spot replacement."""
        return self.lamp_price + self.spot_labour + self.spot_equipment + self.disposal_fee_per_lamp

    def energy_per_burn_hour(self, power_factor: float = 1.0) -> float:
        """Energy cost per position per burn hour at lamp watts x power_factor."""
        return self.energy_price_per_kwh * self.lamp_watts * power_factor / 1000.0


@dataclass(frozen=True)
class Conditions:
    """The operating point a group plan uses."""

    voltage_v: float  # volts
    hours_per_start: float | None  # burn hours per start; None = the rated cycle
    light_floor: float | None  # fraction of initial light
    burnout_ceiling: float | None  # share of positions
    rupture_fraction: float  # fraction of rated life (used only with rupture risk)
    dirt: DirtRegime | None = None  # luminaire dirt and cleaning (None: clean luminaires)
    weekly_burn_hours: float = 0.0  # turns burn hours into calendar time for the dirt


@dataclass(frozen=True)
class GroupPlan:
    """A lamp type's group interval in an area, with what it was computed from."""

    plan: BlockPlan
    life: Weibull
    life_factor: float
    voltage_life_factor: float
    switching_factor: float
    light_floor_h: float | None
    rupture_cap_h: float | None
    warnings: tuple[str, ...] = field(default_factory=tuple)
    power_factor: float = 1.0  # lamp watts at the operating voltage / rated watts
    light_factor: float = 1.0  # initial light at the operating voltage / rated
    horizon_h: float = 0.0  # renewal grid horizon the plan used, hours
    objective: str = "cost"  # which objective chose plan.interval_h
    cost_plan: BlockPlan | None = None  # the cost objective's plan, when another one chose


def light_floor_hours(
    model: LampModel,
    life: Weibull,
    floor: float,
    horizon_h: float,
    light_factor: float = 1.0,
    dirt: DirtRegime | None = None,
    weekly_h: float = 0.0,
) -> float:
    """Burn hours at which maintained light first reaches the floor (inf if never)."""
    return floor_hours(model, life, floor, horizon_h, light_factor, dirt, weekly_h)


def scaled_life(
    model: LampModel, cond: Conditions
) -> tuple[Weibull, VoltageEffect, float, list[str]]:
    """Weibull life at the operating voltage and switching cycle (voltage effect, switching)."""
    ve = voltage_effect(
        cond.voltage_v,
        model.rated_volts,
        model.technology,
        model.ballast_behaviour,
        life_exponent=model.life_exponent,
        light_exponent=model.light_exponent,
        power_exponent=model.power_exponent,
        driver_range=model.driver_range,
    )
    hps = math.nan if cond.hours_per_start is None else cond.hours_per_start
    sw, warn = switching_life_factor(
        hps,
        model.rated_hours_per_start,
        model.second_hours_per_start,
        model.second_life_ratio,
        default_slope=model.switching_slope,
    )
    warnings = list(ve.warnings)
    if bool(np.asarray(warn).ravel()[0]):
        warnings.append("switching cycle outside the modelled range; life factor bounded")
    swf = float(np.asarray(sw).ravel()[0])
    return Weibull(model.shape, model.scale_h * ve.life_factor * swf), ve, swf, warnings


@lru_cache(maxsize=512)
def _unit_renewal(shape: float, horizon_ratio: float, n: int) -> RenewalCurve:
    return weibull_renewal(shape, 1.0, horizon_ratio, n)


def weibull_renewal_scaled(life: Weibull, horizon_h: float, n: int = RENEWAL_STEPS) -> RenewalCurve:
    """The renewal curve of a Weibull life, from a cached unit-scale curve of the same shape.

    F(t) depends on t/eta only, so on the grid t_k = k * horizon / n the renewal values M(t_k)
    are those of the eta = 1 curve on t_k / eta, and the density scales by 1/eta. With the
    horizon a fixed multiple of the mean life this equals weibull_renewal(shape, scale,
    horizon, n) to rounding, and areas differing only in voltage share one solve.
    """
    unit = _unit_renewal(life.shape, horizon_h / life.scale, n)
    return RenewalCurve(
        t=unit.t * life.scale, m=unit.m, density=unit.density / life.scale, cdf=unit.cdf
    )


@dataclass(frozen=True, kw_only=True)
class _Prepared:
    """A group's life at its conditions and its caps, before the interval search."""

    life: Weibull
    ve: VoltageEffect
    swf: float
    warnings: tuple[str, ...]
    mean_h: float
    horizon: float  # hours: HORIZON_MEANS mean lives
    floor_h: float | None
    cap_h: float | None


def _prepare(model: LampModel, cond: Conditions) -> _Prepared:
    """Scaled life, light-floor hours and rupture cap of one lamp type at its conditions."""
    return _prepared(model, cond, *scaled_life(model, cond))


def _prepared(
    model: LampModel,
    cond: Conditions,
    life: Weibull,
    ve: VoltageEffect,
    swf: float,
    warnings: list[str],
    floor_known: float | None = None,
) -> _Prepared:
    mean_h = life.mean()
    horizon = HORIZON_MEANS * mean_h
    floor_h = None
    if cond.light_floor is not None and floor_known is not None:  # found for many at once
        floor_h = floor_known if math.isfinite(floor_known) else None
    elif cond.light_floor is not None:
        h = light_floor_hours(
            model,
            life,
            cond.light_floor,
            horizon,
            ve.light_factor,
            cond.dirt,
            cond.weekly_burn_hours,
        )
        floor_h = h if math.isfinite(h) else None
    cap_h = None
    if model.rupture_risk:
        vf = ve.life_factor
        cap_h = cond.rupture_fraction * min(model.rated_life_h, model.rated_life_h * vf * swf)
    return _Prepared(
        life=life,
        ve=ve,
        swf=swf,
        warnings=tuple(warnings),
        mean_h=mean_h,
        horizon=horizon,
        floor_h=floor_h,
        cap_h=cap_h,
    )


def _prepare_many(model: LampModel, conds: Sequence[Conditions]) -> list[_Prepared]:
    """_prepare for many conditions of one lamp model: one vectorised voltage and cycle call.

    Conditions the scalar path would word a warning for (outside the band or driver range, a
    supply fault, below the halogen floor) or refuse go through scaled_life itself.
    """
    volts = np.array([c.voltage_v for c in conds], dtype=np.float64)
    hps = np.array([math.nan if c.hours_per_start is None else c.hours_per_start for c in conds])
    vm = voltage_model(
        model.rated_volts,
        model.technology,
        model.ballast_behaviour,
        life_exponent=model.life_exponent,
        light_exponent=model.light_exponent,
        power_exponent=model.power_exponent,
        driver_range=model.driver_range,
    )
    scalar = ~(np.isfinite(volts) & (volts > 0)) | ~(np.isnan(hps) | (hps > 0))
    ratio = np.where(scalar, 1.0, volts) / model.rated_volts
    life, light, power, out = vm.factors(ratio)
    scalar |= needs_words(vm, ratio, out)
    sw, warn = switching_life_factor(
        np.where(scalar, math.nan, hps),
        model.rated_hours_per_start,
        model.second_hours_per_start,
        model.second_life_ratio,
        default_slope=model.switching_slope,
    )
    result: list[_Prepared | None] = [None] * len(conds)
    # Conditions alike in what the voltage and the cycle made of them, and in the floor, dirt,
    # burn rate and rupture fraction, share one _Prepared: _prepared reads nothing else.
    lists = (life.tolist(), light.tolist(), power.tolist(), sw.tolist(), warn.tolist())
    factors = zip(*lists, strict=True)
    alike: dict[tuple[Any, ...], list[int]] = {}
    for i, (cond, f) in enumerate(zip(conds, factors, strict=True)):
        if scalar[i]:
            result[i] = _prepare(model, cond)
            continue
        key = (*f, cond.light_floor, cond.dirt, cond.weekly_burn_hours, cond.rupture_fraction)
        alike.setdefault(key, []).append(i)
    lives: dict[int, tuple[Weibull, VoltageEffect, float, list[str]]] = {}
    for (lf, light_f, power_f, swf, warned, *_), idx in alike.items():
        ve = VoltageEffect(lf, light_f, power_f, ())
        words = ["switching cycle outside the modelled range; life factor bounded"] * bool(warned)
        lives[idx[0]] = (Weibull(model.shape, model.scale_h * ve.life_factor * swf), ve, swf, words)
    # Every light floor of this model in one pass (maintained.floor_hours_many).
    floored = [i for i in lives if conds[i].light_floor is not None]
    cases = [
        FloorCase(
            life=lives[i][0],
            floor=float(conds[i].light_floor),  # type: ignore[arg-type]
            horizon_h=HORIZON_MEANS * lives[i][0].mean(),
            light_factor=lives[i][1].light_factor,
            dirt=conds[i].dirt,
            weekly_h=conds[i].weekly_burn_hours,
        )
        for i in floored
    ]
    floors = dict(zip(floored, floor_hours_many(model, cases), strict=True))
    for idx in alike.values():
        scaled, ve, swf, words = lives[idx[0]]
        shared = _prepared(model, conds[idx[0]], scaled, ve, swf, words, floors.get(idx[0]))
        for i in idx:
            result[i] = shared
    return [r for r in result if r is not None]


def _on_unit_curve(p: _Prepared) -> bool:
    """The core's own grid for a Weibull (horizon 3 mean lives), solved once per shape.

    A rupture cap past that horizon takes the core's Weibull path instead.
    """
    return p.cap_h is None or p.cap_h <= p.horizon


def _group_plan(p: _Prepared, plan: BlockPlan) -> GroupPlan:
    vf = p.ve.life_factor
    return GroupPlan(
        plan,
        p.life,
        vf * p.swf,
        vf,
        p.swf,
        p.floor_h,
        p.cap_h,
        p.warnings,
        power_factor=p.ve.power_factor,
        light_factor=p.ve.light_factor,
        horizon_h=max(p.horizon, p.cap_h or 0.0),
    )


def plan_group(model: LampModel, costs: CostInputs, cond: Conditions) -> GroupPlan:
    """Cheapest group interval for one lamp type under the area's caps (numeric core)."""
    p = _prepare(model, cond)
    # (With a curve the burnout ceiling hours come from F on the grid, linearly interpolated.)
    life_in: Weibull | RenewalCurve = p.life
    if _on_unit_curve(p):
        life_in = weibull_renewal_scaled(p.life, p.horizon)
    plan = plan_block_replacement(
        life_in,
        costs.c_group,
        costs.c_spot,
        mean_life_h=p.mean_h,
        light_floor_h=p.floor_h,
        burnout_ceiling=cond.burnout_ceiling,
        rupture_cap_h=p.cap_h,
    )
    return _group_plan(p, plan)


def _nan(v: float | None) -> float:
    return math.nan if v is None else float(v)


def _distinct_problems(
    cases: Sequence[tuple[_Prepared, tuple[LampModel, CostInputs, Conditions]]],
) -> tuple[list[int], list[int]]:
    """Each case's row among the distinct block problems, and each row's first case.

    A problem on a shared unit curve is fixed by the scaled life, the two costs, the mean
    life and the three caps (ScaledProblems' columns); nothing else enters the search.
    """
    seen: dict[tuple[float | None, ...], int] = {}
    rows: list[int] = []
    first: list[int] = []
    for k, (p, (_, costs, cond)) in enumerate(cases):
        key = (
            p.life.scale,
            costs.c_group,
            costs.c_spot,
            p.mean_h,
            p.floor_h,  # None where not set (NaN would never equal itself in a key)
            cond.burnout_ceiling,
            p.cap_h,
        )
        row = seen.setdefault(key, len(seen))
        if row == len(first):
            first.append(k)
        rows.append(row)
    return rows, first


def plan_groups(
    items: Sequence[tuple[LampModel, CostInputs, Conditions]],
) -> list[GroupPlan]:
    """plan_group for many groups: one vectorised search per shared unit renewal curve."""
    by_model: dict[int, list[int]] = {}
    for i, (m, _, _) in enumerate(items):
        by_model.setdefault(id(m), []).append(i)
    prepared: list[_Prepared] = [None] * len(items)  # type: ignore[list-item]
    for idx in by_model.values():
        conds = [items[i][2] for i in idx]
        for i, p in zip(idx, _prepare_many(items[idx[0]][0], conds), strict=True):
            prepared[i] = p
    out: list[GroupPlan | None] = [None] * len(items)
    by_unit: dict[tuple[float, float], list[int]] = {}
    for i, p in enumerate(prepared):
        if _on_unit_curve(p):
            by_unit.setdefault((p.life.shape, p.horizon / p.life.scale), []).append(i)
        else:
            out[i] = plan_group(*items[i])
    for (shape, ratio), idx in by_unit.items():
        ps = [prepared[i] for i in idx]
        rows, first = _distinct_problems([(ps[k], items[i]) for k, i in enumerate(idx)])
        uniq = first
        costs = [items[idx[k]][1] for k in uniq]
        problems = ScaledProblems(
            unit=_unit_renewal(shape, ratio, RENEWAL_STEPS),
            scale_h=np.array([ps[k].life.scale for k in uniq]),
            c_group=np.array([c.c_group for c in costs]),
            c_spot=np.array([c.c_spot for c in costs]),
            mean_life_h=np.array([ps[k].mean_h for k in uniq]),
            light_floor_h=np.array([_nan(ps[k].floor_h) for k in uniq]),
            burnout_ceiling=np.array([_nan(items[idx[k]][2].burnout_ceiling) for k in uniq]),
            rupture_cap_h=np.array([_nan(ps[k].cap_h) for k in uniq]),
        )
        # Alike groups (same scaled life, costs and caps) share one search: the rows are
        # solved independently, so a shared row is the very plan its own row would give.
        plans = plan_block_replacement_scaled(problems)
        made: dict[tuple[int, int], GroupPlan] = {}  # one GroupPlan per (prepared, plan)
        for k, (i, p) in enumerate(zip(idx, ps, strict=True)):
            pair = (id(p), rows[k])
            if pair not in made:
                made[pair] = _group_plan(p, plans[rows[k]])
            out[i] = made[pair]
    return [g for g in out if g is not None]


class PlanCache:
    """Plans keyed by their exact inputs, so areas alike are computed once per run."""

    def __init__(self) -> None:
        self._plans: dict[tuple[Any, ...], GroupPlan] = {}

    def get(self, model: LampModel, costs: CostInputs, cond: Conditions) -> GroupPlan:
        """The plan for these inputs, computed on first use."""
        key = self.key(model, costs, cond)
        got = self._plans.get(key)
        if got is None:
            got = plan_group(model, costs, cond)
            self._plans[key] = got
        return got

    @staticmethod
    def key(model: LampModel, costs: CostInputs, cond: Conditions) -> tuple[Any, ...]:
        """What a plan depends on (the lamp model's identity and life, the two costs, the
        conditions); the life's shape and scale tell a fit-bounds model from its type's."""
        return (
            model.lamp_type_id,
            model.code,
            model.ballast_behaviour,
            model.shape,
            model.scale_h,
            costs.c_group,
            costs.c_spot,
            cond,
        )

    def get_many(
        self, items: Sequence[tuple[LampModel, CostInputs, Conditions]]
    ) -> list[GroupPlan]:
        """Plans for many inputs; the ones not cached yet computed together (plan_groups)."""
        keys = [self.key(*it) for it in items]
        todo: dict[tuple[Any, ...], tuple[LampModel, CostInputs, Conditions]] = {}
        for k, it in zip(keys, items, strict=True):
            if k not in self._plans:
                todo.setdefault(k, it)
        self._plans.update(zip(todo, plan_groups(list(todo.values())), strict=True))
        return [self._plans[k] for k in keys]
