"""The plan's maintained-light view and how its interval moves across the life curve's bounds.

Maintained light (planning/maintained.py): the regime the floor used, the light at the end
of the interval, and the cleaning-only option (a cleaning visit at mid-interval without
relamping: its light gain and its cost, cleaning labour plus one equipment hire).

Fit bounds: the same plan recomputed with the Weibull scale at the lower and at the upper
bound of the curve in use (the field fit's bounds or the credibility blend's; a catalogue
curve with no field record: the credibility prior, ln eta +- z sigma with sigma = ln 1.5 /
1.645, reliability/credibility.py), every other input unchanged. The shape is held.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, replace

import numpy as np
from scipy.special import ndtri

from service.catalogue.lamp_model import LampModel
from service.catalogue.resolved import CurveInUse
from service.planning.group_plan import Conditions, CostInputs, GroupPlan, plan_group
from service.planning.maintained import CleaningOnly, cleaning_only, maintained_in_cycle
from service.reliability.credibility import SIGMA_LN_SCALE
from service.reliability.dirt import SOURCE


@dataclass(frozen=True)
class MaintainedView:
    """What the light floor used and the cleaning-only option."""

    source: str
    light_factor: float  # voltage light factor at the operating voltage
    light_at_interval: float | None  # maintained light just before the group relamp
    cleaning_labour_per_position: float
    cleaning_in_group_visit: bool
    cleaning_only: CleaningOnly | None


def maintained_view(
    model: LampModel, costs: CostInputs, cond: Conditions, gp: GroupPlan
) -> MaintainedView:
    """The maintained-light figures of one lamp type's plan."""
    t = gp.plan.interval_h
    weekly = cond.weekly_burn_hours
    at_t = None
    clean: CleaningOnly | None = None
    if t is not None:
        at_t = float(
            maintained_in_cycle(model, gp.life, np.array([t]), gp.light_factor, cond.dirt, weekly)[
                0
            ]
        )
        if cond.dirt is not None:
            visit = (costs.cleaning_labour_per_position + costs.group_equipment_share) * max(
                costs.area_positions, 1
            )
            clean = cleaning_only(
                model, gp.life, t, gp.light_factor, cond.dirt, weekly, visit, costs.area_positions
            )
    return MaintainedView(
        SOURCE,
        gp.light_factor,
        at_t,
        costs.cleaning_labour_per_position,
        costs.relamp_cleans,
        clean,
    )


@dataclass(frozen=True)
class FitBounds:
    """The plan at the lower and the upper bound of the life curve's scale."""

    confidence: float
    scale_bounds_h: tuple[float, float]  # rated-condition Weibull scale, hours
    basis: str
    lower: GroupPlan
    upper: GroupPlan


def scale_bounds(
    curve: CurveInUse | None, scale_h: float
) -> tuple[tuple[float, float], str, float]:
    """The curve's scale bounds, or the credibility prior's around the catalogue scale."""
    if curve is not None and curve.scale_bounds_h is not None:
        return curve.scale_bounds_h, f"{curve.method} curve's bounds", curve.confidence
    conf = curve.confidence if curve is not None else 0.90
    half = float(ndtri(0.5 + conf / 2.0)) * SIGMA_LN_SCALE
    bounds = (scale_h * math.exp(-half), scale_h * math.exp(half))
    return bounds, "catalogue prior (within x1.5 of the field at 90 %, an assumption)", conf


def across_bounds(
    model: LampModel, costs: CostInputs, cond: Conditions, curve: CurveInUse | None
) -> FitBounds:
    """The group plan recomputed at each end of the scale's bounds (shape held)."""
    (lo, hi), basis, conf = scale_bounds(curve, model.scale_h)
    lower = plan_group(replace(model, scale_h=lo), costs, cond)
    upper = plan_group(replace(model, scale_h=hi), costs, cond)
    return FitBounds(conf, (lo, hi), basis, lower, upper)
