"""Every site's area plans for one request, sharing the loads (the overview page).

One position-ages load for the whole portfolio (active fixtures), one type table (the life
curves in use, field fits included), one query of areas and of last group relamps, and one
PlanCache, so areas alike across sites share their interval search. The ages and the type
table are handed back for the weekly-burnout chart, which needs the same positions. Nothing
is kept between requests: plans depend on readings, removals and the register, so each
request computes them from the data as it is.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass
from datetime import date, datetime

import numpy as np
from sqlalchemy import select
from sqlalchemy.orm import Session

from service.catalogue.resolved import TypeTable
from service.forecasting.fit import load_fitted_types
from service.planning.group_plan import PlanCache
from service.planning.positions import PositionArrays, from_ages
from service.planning.schemas import PlanOverrides
from service.planning.service import (
    AreaPlan,
    LastRelamps,
    PlanInputs,
    assemble_plans,
    models_of,
    pending_plans,
)
from service.readings.ages import PositionAges, position_ages
from service.register.models import Area, Site


@dataclass(frozen=True, kw_only=True)
class PortfolioPlans:
    """The plans of every site, with the positions and life curves they came from."""

    plans: list[AreaPlan]  # site by site in the given order, each soonest due first
    ages: PositionAges  # every active position of the portfolio
    types: TypeTable  # loaded for ages (lamp type and ballast of each position)


def _site_positions(pos: PositionArrays, mask: np.ndarray) -> PositionArrays:
    """The positions where mask holds."""
    return PositionArrays(
        position_id=pos.position_id[mask],
        fixture_id=pos.fixture_id[mask],
        area_id=pos.area_id[mask],
        lamp_type_id=pos.lamp_type_id[mask],
        ballast_kind=pos.ballast_kind[mask],
        age_h=pos.age_h[mask],
        starts=pos.starts[mask],
        voltage_v=pos.voltage_v[mask],
        burned_out=pos.burned_out[mask],
        burn_h_per_week=pos.burn_h_per_week[mask],
        source=pos.source,
        installed_at_s=pos.installed_at_s[mask] if pos.installed_at_s.size else pos.installed_at_s,
    )


def portfolio_plans(
    session: Session,
    sites: Sequence[Site],
    at: datetime,
    *,
    last_relamps: LastRelamps,
    scoped: bool = False,
) -> PortfolioPlans:
    """site_plans for every site, computed from one load of the portfolio.

    scoped: load the positions of these sites only (one site's plans without the rest);
    else every active position, so the chart sees the whole portfolio.
    """
    if scoped and len(sites) == 1:
        ages = position_ages(session, site_id=sites[0].id, at=at, active_only=True)
    else:
        ages = position_ages(session, at=at, active_only=True)
    types = load_fitted_types(session, ages.lamp_type_id, ballast_kinds=ages.ballast_kind)
    pos = from_ages(ages)
    models, curves, ballast = models_of(types, pos) if pos.size else ({}, {}, pos.ballast_kind)
    site_ids = [s.id for s in sites]
    areas = session.scalars(
        select(Area).where(Area.site_id.in_(site_ids), Area.retired_at.is_(None)).order_by(Area.id)
    ).all()
    last = last_relamps(session, [a.id for a in areas])
    site_of = ages.site_id
    pending = []
    for site in sites:
        mask = site_of == site.id
        inp = PlanInputs(
            site=site,
            areas=[a for a in areas if a.site_id == site.id],
            pos=_site_positions(pos, mask),
            ballast=ballast[mask],
            models=models,
            curves=curves,
            at=at,
            last_relamps=last,
        )
        pending.append(pending_plans(inp, PlanOverrides()))
    # One interval search for the whole portfolio: areas alike across sites share it.
    searched = PlanCache().get_many([it for sp in pending for it in sp.items()])
    out: list[AreaPlan] = []
    start = 0
    for sp in pending:
        plans = assemble_plans(sp, searched[start : start + len(sp.pending)], PlanOverrides())
        start += len(sp.pending)
        out.extend(sorted(plans, key=lambda p: (p.due_on or date.max, p.area.id)))
    return PortfolioPlans(plans=out, ages=ages, types=types)
