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
from dataclasses import dataclass, field
from functools import lru_cache
from typing import Any

import numpy as np

from service.catalogue.lamp_model import LampModel
from service.planning.maintained import floor_hours
from service.reliability.conditions import VoltageEffect, switching_life_factor, voltage_effect
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


def plan_group(model: LampModel, costs: CostInputs, cond: Conditions) -> GroupPlan:
    """Cheapest group interval for one lamp type under the area's caps (numeric core)."""
    life, ve, swf, warnings = scaled_life(model, cond)
    vf = ve.life_factor
    mean_h = life.mean()
    horizon = HORIZON_MEANS * mean_h
    floor_h = None
    if cond.light_floor is not None:
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
        cap_h = cond.rupture_fraction * min(model.rated_life_h, model.rated_life_h * vf * swf)
    # The core's own grid for a Weibull (horizon 3 mean lives, RENEWAL_STEPS steps), solved
    # once per shape; a rupture cap past that horizon takes the core's Weibull path instead.
    # (With a curve the burnout ceiling hours come from F on the grid, linearly interpolated.)
    life_in: Weibull | RenewalCurve = life
    if cap_h is None or cap_h <= horizon:
        life_in = weibull_renewal_scaled(life, horizon)
    plan = plan_block_replacement(
        life_in,
        costs.c_group,
        costs.c_spot,
        mean_life_h=mean_h,
        light_floor_h=floor_h,
        burnout_ceiling=cond.burnout_ceiling,
        rupture_cap_h=cap_h,
    )
    return GroupPlan(
        plan,
        life,
        vf * swf,
        vf,
        swf,
        floor_h,
        cap_h,
        tuple(warnings),
        power_factor=ve.power_factor,
        light_factor=ve.light_factor,
        horizon_h=max(horizon, cap_h or 0.0),
    )


class PlanCache:
    """Plans keyed by their exact inputs, so areas alike are computed once per run."""

    def __init__(self) -> None:
        self._plans: dict[tuple[Any, ...], GroupPlan] = {}

    def get(self, model: LampModel, costs: CostInputs, cond: Conditions) -> GroupPlan:
        """The plan for these inputs, computed on first use."""
        key = (
            model.lamp_type_id,
            model.code,
            model.ballast_behaviour,
            costs.c_group,
            costs.c_spot,
            cond,
        )
        got = self._plans.get(key)
        if got is None:
            got = plan_group(model, costs, cond)
            self._plans[key] = got
        return got
