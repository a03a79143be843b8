"""Lamp choice at relamp time: life-cycle cost of each option for an area's lamp type (pure).

Options for one lamp type's positions in an area, all starting at the next group relamp
(time 0): the same lamp type; a lamp type of the same family rated nearer the measured
voltage; each retrofit option (an LED lamp costed per lamp, or a replacement luminaire per fixture).

Each option runs on its own replacement cycle: the block-replacement plan of the numeric
core (planning.group_plan.plan_group: the cost optimum under the area's light floor,
burnout ceiling and rupture cap, or spot only) with its Weibull life scaled to the operating
voltage (filament lamps: life x V^-n, light x V^3.4, power x V^1.6, the classic exponents
[practice: common practice, the IES Lighting Handbook's filament-lamp characteristic
curves]); an LED's catastrophic failures follow the Weibull of its failure B10, its light the
exponential through L70 (B = 1, alpha = ln(1/0.7)/L70, the TM-21 form).

Yearly flows over the horizon (default 10 years), burn hours B a year from the area's
schedule, years k = 1..H covering burn hours ((k-1)B, kB]:
- group relamps at T, 2T, ... (interval T): each costs c_group per unit (lamp or kit,
  group labour, the visit's equipment share, disposal) plus cleaning per fixture;
- spot replacements: S(u) = floor(u/T) M(T) + M(u mod T) per unit (M the renewal function;
  spot only: S(u) = M(u)), each c_spot; S(kB) - S((k-1)B) in year k;
- energy: units x W(V) x B / 1000 kWh at the site tariff x (1 + escalation)^(k-1);
- year 0: the relamp itself, units x c_group + cleaning; a retrofit adds the removed lamps'
  disposal and takes off the rebate.
Life-cycle cost = NPV of the costs at the site's discount rate (planning.cashflow). Against
the same lamp type each option's saving flows give simple and discounted payback and IRR;
energy and CO2 saved use the site's emission factor. Light: mean delivered lumens over the
option's cycle (energy.energy_view: survivors x lumen maintenance; for lamps outliving the horizon without
a group relamp, the lumen maintenance of the first lamps averaged over the horizon) over the
design light (the current type's rated initial lumens x its positions); below the light
floor is marked.
No residual value is counted at the horizon (ASSUMPTION, stated in every result).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from service.catalogue.lamp_model import LampModel
from service.planning import cashflow
from service.planning.energy import EnergyView, energy_view
from service.planning.group_plan import (
    Conditions,
    CostInputs,
    GroupPlan,
    plan_group,
    weibull_renewal_scaled,
)

SAME_TYPE, RATED_FOR_VOLTAGE, RETROFIT = "same_type", "rated_for_voltage", "retrofit"
DEFAULT_HORIZON_YEARS = 10
STATIONARY_MEANS = 3.0  # horizons this many mean lives long use the stationary light mix
NO_RESIDUAL = "no residual value is counted at the horizon"
CATEGORIES = ("lamps", "labour", "equipment", "disposal", "cleaning", "rebate", "energy")


@dataclass(frozen=True)
class Economics:
    """The site's money terms and the area's burn rate for a comparison."""

    discount_rate: float  # per year, fraction
    escalation_rate: float  # energy price growth per year, fraction
    emission_factor_kg_per_kwh: float | None  # None: CO2 not reported
    burn_hours_per_year: float
    horizon_years: int = DEFAULT_HORIZON_YEARS


@dataclass(frozen=True)
class Option:
    """One candidate: a model, its per-unit costs, how many units, and year-0 extras."""

    kind: str
    label: str
    model: LampModel
    costs: CostInputs  # per unit: a lamp position, or a fixture for a luminaire
    cond: Conditions
    units: int
    fixtures: int
    cleaning_per_fixture_visit: float = 0.0  # money at each group visit
    removal_disposal: float = 0.0  # year 0: disposal of the lamps a retrofit takes out
    rebate: float = 0.0  # year 0, taken off
    withdrawn: str | None = None  # why it cannot be bought any more
    lamp_type_id: int | None = None
    retrofit_option_id: int | None = None
    plan: GroupPlan | None = None  # given when already computed (the area's own plan)


@dataclass(frozen=True)
class OptionResult:
    """An option's cycle, yearly costs, life-cycle cost and figures against the same type."""

    option: Option
    plan: GroupPlan
    watts_per_unit: float  # at the operating voltage
    costs_by_year: dict[str, np.ndarray]  # category -> years 0..H, site currency
    kwh_by_year: np.ndarray
    life_cycle_cost: float  # NPV of all costs
    npv_by_category: dict[str, float]
    mean_light_fraction: float | None  # delivered light / design light; None: not computed
    below_light_floor: bool
    saving_npv: float = 0.0  # vs the same type: its life-cycle cost minus this one's
    simple_payback_years: float | None = None
    discounted_payback_years: float | None = None
    irr: float | None = None
    energy_saved_kwh: float = 0.0  # over the horizon
    co2_saved_kg: float | None = None
    notes: tuple[str, ...] = field(default_factory=tuple)

    @property
    def total_by_year(self) -> np.ndarray:
        """All costs per year, years 0..H."""
        return np.sum(list(self.costs_by_year.values()), axis=0)


@dataclass(frozen=True)
class Comparison:
    """Every option for one lamp type in an area, and which is best."""

    results: list[OptionResult]
    best: OptionResult | None
    replacement_required: bool  # the current type is withdrawn
    notes: tuple[str, ...]


def spot_counts(gp: GroupPlan, bounds_h: np.ndarray) -> np.ndarray:
    """Expected spot replacements per unit in (0, u] for each u in bounds_h (S(u) above)."""
    t_int = gp.plan.interval_h
    if t_int is None:
        curve = weibull_renewal_scaled(gp.life, max(float(bounds_h[-1]), 1e-9))
        return curve.at(bounds_h)
    curve = weibull_renewal_scaled(gp.life, t_int)
    cycles = np.floor(bounds_h / t_int)
    return cycles * float(curve.at_scalar(t_int)) + curve.at(bounds_h - cycles * t_int)


def group_counts(gp: GroupPlan, bounds_h: np.ndarray) -> np.ndarray:
    """Group relamps after time 0 in each year ((k-1)B, kB], for years 1..H."""
    t_int = gp.plan.interval_h
    if t_int is None:
        return np.zeros(bounds_h.size - 1)
    done = np.floor(bounds_h / t_int + 1e-9)
    return np.diff(done)


def yearly_costs(
    opt: Option, gp: GroupPlan, eco: Economics
) -> tuple[dict[str, np.ndarray], np.ndarray, float]:
    """Costs by category for years 0..H, kWh by year, and watts per unit at the voltage."""
    h = eco.horizon_years
    bounds = eco.burn_hours_per_year * np.arange(h + 1, dtype=np.float64)
    groups = np.concatenate(([1.0], group_counts(gp, bounds)))  # year 0: the relamp itself
    spots = np.concatenate(([0.0], np.diff(spot_counts(gp, bounds))))
    c, n = opt.costs, float(opt.units)
    out = {
        "lamps": n * c.lamp_price * (groups + spots),
        "labour": n * (c.group_labour * groups + c.spot_labour * spots),
        "equipment": n * (c.group_equipment_share * groups + c.spot_equipment * spots),
        "disposal": n * c.disposal_fee_per_lamp * (groups + spots),
        "cleaning": opt.fixtures * opt.cleaning_per_fixture_visit * groups,
        "rebate": np.zeros(h + 1),
    }
    out["disposal"][0] += opt.removal_disposal
    out["rebate"][0] -= opt.rebate
    watts = opt.model.rated_watts * gp.power_factor
    kwh = np.concatenate(([0.0], np.full(h, n * watts * eco.burn_hours_per_year / 1000.0)))
    tariff = np.concatenate(
        ([0.0], cashflow.escalated(c.energy_price_per_kwh, eco.escalation_rate, h))
    )
    out["energy"] = kwh * tariff
    return out, kwh, watts


def _light(
    opt: Option, gp: GroupPlan, design_lumens: float | None, horizon_h: float
) -> float | None:
    """Mean delivered light over the option's cycle as a share of the design light."""
    if not design_lumens:
        return None
    ev = energy_view(opt.model, opt.costs, opt.cond, gp)
    if not isinstance(ev, EnergyView):
        return None
    frac = ev.mean_light_fraction
    t_int = gp.plan.interval_h
    if (t_int is None or t_int > horizon_h) and horizon_h < STATIONARY_MEANS * gp.life.mean():
        # Long-lived lamps never group-replaced within the horizon: the first lamps burn most
        # of it, so their own lumen maintenance over the horizon (spot replacements counted
        # at the same age: a little conservative), not the long-run stationary mix.
        u = np.linspace(0.0, horizon_h, 401)
        life_h = gp.life.scale * math.log(2.0) ** (1.0 / gp.life.shape)  # effective B50
        basis_life = None if opt.model.lumen_curve.basis == "hours" else life_h
        frac = float(np.mean(opt.model.lumen_curve.at(u, basis_life)))
    return ev.initial_lumens * frac * opt.units / design_lumens


def evaluate(opt: Option, eco: Economics, design_lumens: float | None) -> OptionResult:
    """One option's plan, yearly costs, life-cycle cost and delivered light."""
    gp = opt.plan or plan_group(opt.model, opt.costs, opt.cond)
    by_year, kwh, watts = yearly_costs(opt, gp, eco)
    npvs = {k: cashflow.npv(eco.discount_rate, v) for k, v in by_year.items()}
    try:
        light = _light(opt, gp, design_lumens, eco.horizon_years * eco.burn_hours_per_year)
    except ValueError:  # a renewal grid that cannot reach the interval: light not shown
        light = None
    floor = opt.cond.light_floor
    below = light is not None and floor is not None and light < floor
    notes = [NO_RESIDUAL, *gp.warnings]
    if below:
        notes.append(f"mean delivered light {light:.0%} of design is below the floor {floor:.0%}")
    if opt.withdrawn:
        notes.append(opt.withdrawn)
    return OptionResult(
        option=opt,
        plan=gp,
        watts_per_unit=watts,
        costs_by_year=by_year,
        kwh_by_year=kwh,
        life_cycle_cost=float(sum(npvs.values())),
        npv_by_category=npvs,
        mean_light_fraction=light,
        below_light_floor=below,
        notes=tuple(notes),
    )


def against(base: OptionResult, res: OptionResult, eco: Economics) -> OptionResult:
    """res with its saving, paybacks, IRR, energy and CO2 saved against the base option."""
    saving = base.total_by_year - res.total_by_year  # year 0 negative: the extra outlay
    kwh = float(np.sum(base.kwh_by_year) - np.sum(res.kwh_by_year))
    f = eco.emission_factor_kg_per_kwh
    return OptionResult(
        **{
            **res.__dict__,
            "saving_npv": base.life_cycle_cost - res.life_cycle_cost,
            "simple_payback_years": cashflow.payback_years(saving) if res is not base else None,
            "discounted_payback_years": (
                cashflow.discounted_payback_years(eco.discount_rate, saving)
                if res is not base
                else None
            ),
            "irr": cashflow.irr(saving) if res is not base else None,
            "energy_saved_kwh": kwh,
            "co2_saved_kg": None if f is None else kwh * f,
        }
    )


def compare(options: list[Option], eco: Economics, design_lumens: float | None) -> Comparison:
    """Evaluate every option against the first (the same lamp type) and pick the best.

    Best: the lowest life-cycle cost among options that can be bought and keep the light
    floor; if none keeps it, the lowest among those that can be bought.
    """
    if not options:
        raise ValueError("no options to compare")
    if not (eco.burn_hours_per_year > 0 and math.isfinite(eco.burn_hours_per_year)):
        raise ValueError("burn hours per year must be a positive number")
    evaluated = [evaluate(o, eco, design_lumens) for o in options]
    base = evaluated[0]
    results = [against(base, r, eco) for r in evaluated]
    buyable = [r for r in results if not r.option.withdrawn]
    keeping = [r for r in buyable if not r.below_light_floor]
    pool = keeping or buyable
    best = min(pool, key=lambda r: r.life_cycle_cost) if pool else None
    notes: list[str] = []
    required = bool(options[0].withdrawn)
    if required:
        notes.append(f"a replacement must be chosen: {options[0].withdrawn}")
    if best is None:
        notes.append("no option can be bought: add a retrofit option or a lamp type")
    elif not keeping:
        notes.append("no option keeps the light floor; the cheapest that can be bought is shown")
    return Comparison(results, best, required, tuple(notes))
