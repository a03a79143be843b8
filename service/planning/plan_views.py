"""The per-group views a plan body shows (energy, maintained light, fit bounds), alike groups once.

A site's body shows, for every lamp-type group, its energy view (energy.energy_view), its
maintained-light view (light_view.maintained_view) and its plan at the life curve's scale
bounds (light_view.across_bounds). Groups alike in what each view reads share one
computation: a view is a pure function of those inputs, so a shared one is the very object
the group's own call would give. What each view reads (and nothing else, in particular not
the operating voltage itself, only what the voltage made of the life and light):
- energy: the lamp model; the group plan's life, horizon, caps, light and power factors,
  chosen and cost-objective intervals; c_group, c_spot, tariff and lamp watts; the burnout
  ceiling, dirt regime and weekly burn hours;
- maintained light: the lamp model; the interval, life and light factor; the dirt regime and
  weekly burn hours; the cleaning labour, equipment hire, area positions and whether the
  group visit cleans;
- fit bounds: every group's two bound plans searched together (group_plan.PlanCache.get_many:
  one vectorised search per shared unit curve, alike problems solved once).
Nothing is kept beyond the one body being built.
"""

from __future__ import annotations

from collections.abc import Callable, Hashable, Sequence
from dataclasses import dataclass, replace
from typing import TypeVar

from service.catalogue.lamp_model import LampModel
from service.planning.energy import EnergyView, Lights
from service.planning.group_plan import Conditions, CostInputs, PlanCache
from service.planning.light_view import FitBounds, MaintainedView, maintained_view, scale_bounds
from service.planning.service import TypeGroup

V = TypeVar("V")


def energy_key(g: TypeGroup) -> tuple[Hashable, ...]:
    """Everything energy.energy_view reads of a group."""
    gp, c, cond = g.group, g.costs, g.cond
    cost_plan = gp.cost_plan or gp.plan
    return (
        id(g.model),
        gp.life,
        gp.horizon_h,
        gp.rupture_cap_h,
        gp.light_floor_h,
        gp.light_factor,
        gp.power_factor,
        gp.plan.interval_h,
        cost_plan.interval_h,
        c.c_group,
        c.c_spot,
        c.energy_price_per_kwh,
        c.lamp_watts,
        cond.burnout_ceiling,
        cond.dirt,
        cond.weekly_burn_hours,
    )


def maintained_key(g: TypeGroup) -> tuple[Hashable, ...]:
    """Everything light_view.maintained_view reads of a group."""
    gp, c, cond = g.group, g.costs, g.cond
    return (
        id(g.model),
        gp.plan.interval_h,
        gp.life,
        gp.light_factor,
        cond.dirt,
        cond.weekly_burn_hours,
        c.cleaning_labour_per_position,
        c.equipment_hire_per_visit,
        c.area_positions,
        c.relamp_cleans,
    )


def _shared(
    groups: Sequence[TypeGroup],
    key: Callable[[TypeGroup], Hashable],
    make: Callable[[TypeGroup], V],
) -> dict[int, V]:
    """make(g) by id(g), computed once per distinct key."""
    done: dict[Hashable, V] = {}
    out: dict[int, V] = {}
    for g in groups:
        k = key(g)
        if k not in done:
            done[k] = make(g)
        out[id(g)] = done[k]
    return out


def bounds_many(groups: Sequence[TypeGroup]) -> dict[int, FitBounds]:
    """light_view.across_bounds of every group by id(g), the bound plans searched together."""
    models: dict[tuple[int, float], LampModel] = {}

    def bound(model: LampModel, scale_h: float) -> LampModel:
        # One bound model per (model, scale): plan_groups prepares each model's groups at once.
        key = (id(model), scale_h)
        if key not in models:  # replace() only on a miss: it costs more than the lookup
            models[key] = replace(model, scale_h=scale_h)
        return models[key]

    items: list[tuple[LampModel, CostInputs, Conditions]] = []
    heads = []
    for g in groups:
        (lo, hi), basis, conf = scale_bounds(g.curve, g.model.scale_h)
        items += [(bound(g.model, lo), g.costs, g.cond), (bound(g.model, hi), g.costs, g.cond)]
        heads.append((conf, (lo, hi), basis))
    plans = PlanCache().get_many(items)
    return {
        id(g): FitBounds(conf, lohi, basis, plans[2 * k], plans[2 * k + 1])
        for k, (g, (conf, lohi, basis)) in enumerate(zip(groups, heads, strict=True))
    }


@dataclass(frozen=True)
class PlanViews:
    """Each group's energy, maintained-light and fit-bounds views, by id of the group."""

    groups: tuple[TypeGroup, ...]  # held so the ids stay theirs
    energy: dict[int, EnergyView | str]
    maintained: dict[int, MaintainedView]
    bounds: dict[int, FitBounds]

    @classmethod
    def of(cls, groups: Sequence[TypeGroup]) -> PlanViews:
        """The views of these groups, alike groups computed once."""
        lights: Lights = {}  # one convolution per delivered light, this body only
        return cls(
            tuple(groups),
            _shared(groups, energy_key, lambda g: g.energy_with(lights)),
            _shared(
                groups,
                maintained_key,
                lambda g: maintained_view(g.model, g.costs, g.cond, g.group),
            ),
            bounds_many(groups),
        )
