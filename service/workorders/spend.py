"""This calendar year's spend per site, from the work orders completed so far.

Orders store no cost, so each completed order is priced as the plan and the budget price
the same work (stock.budget.group_cost / spot_cost over the area's current plan inputs,
planning.group_plan.CostInputs): lamps fitted (every position not skipped) at the lamp
price, labour per lamp, disposal for mercury lamps, and equipment hire (one hire per group
relamp visit; per spot lamp for spot orders). The year runs from 1 January in the site's
time zone. Lamps of an area and lamp type with no current plan (its fixtures retired since)
cannot be priced; they are counted, not guessed.
"""

from __future__ import annotations

from collections.abc import Iterable, Sequence
from dataclasses import dataclass, field
from datetime import datetime
from zoneinfo import ZoneInfo

from sqlalchemy import select
from sqlalchemy.orm import Session

from service.planning.group_plan import CostInputs
from service.planning.service import AreaPlan
from service.register.models import Site
from service.stock.budget import group_cost, spot_cost
from service.workorders.models import (
    LineOutcome,
    WorkOrder,
    WorkOrderKind,
    WorkOrderLine,
    WorkOrderState,
)


@dataclass(frozen=True, kw_only=True)
class SiteSpend:
    """A site's spend this year, in its currency, by category, with what could not be priced."""

    site_id: int
    currency: str
    since: datetime  # 1 January, 00:00 in the site's zone
    orders: int  # completed orders counted
    lamps: int  # lamps fitted
    by_category: dict[str, float] = field(default_factory=dict)
    unpriced_lamps: int = 0

    @property
    def total(self) -> float:
        """The sum over the categories."""
        return sum(self.by_category.values())


def year_start(site: Site, at: datetime) -> datetime:
    """1 January of the current year at midnight in the site's time zone (aware)."""
    zone = ZoneInfo(site.time_zone)
    return datetime(at.astimezone(zone).year, 1, 1, tzinfo=zone)


@dataclass(frozen=True, kw_only=True)
class DoneLine:
    """One completed order line: what the order was and how many lamps went in."""

    order_id: int
    site_id: int
    area_id: int
    kind: str
    lamp_type_id: int
    fitted: int


def fitted(position_outcomes: list[dict[str, object]] | None) -> int:
    """Lamps fitted on a line: positions whose outcome is not 'skipped'."""
    return sum(1 for e in position_outcomes or [] if e.get("outcome") != LineOutcome.SKIPPED)


def load_done_lines(session: Session, sites: Sequence[Site], at: datetime) -> list[DoneLine]:
    """Lines of the orders completed this calendar year at these sites (a query per site)."""
    out: list[DoneLine] = []
    for site in sites:  # each site has its own 1 January
        rows = session.execute(
            select(
                WorkOrder.id,
                WorkOrder.area_id,
                WorkOrder.kind,
                WorkOrderLine.lamp_type_id,
                WorkOrderLine.position_outcomes,
            )
            .join(WorkOrderLine, WorkOrderLine.work_order_id == WorkOrder.id)
            .where(
                WorkOrder.site_id == site.id,
                WorkOrder.state == WorkOrderState.DONE,
                WorkOrder.completed_at >= year_start(site, at),
                WorkOrder.completed_at <= at,
            )
        ).all()
        out.extend(
            DoneLine(
                order_id=r[0],
                site_id=site.id,
                area_id=r[1],
                kind=r[2],
                lamp_type_id=r[3],
                fitted=fitted(r[4]),
            )
            for r in rows
        )
    return out


def price_spend(
    sites: Sequence[Site], lines: Iterable[DoneLine], plans: Iterable[AreaPlan], at: datetime
) -> dict[int, SiteSpend]:
    """Each site's spend from its completed lines, priced with the plans' cost inputs (pure)."""
    costs: dict[tuple[int, int], CostInputs] = {
        (p.area.id, g.lamp_type_id): g.costs for p in plans for g in p.groups
    }
    sums: dict[int, dict[str, float]] = {s.id: {} for s in sites}
    orders: dict[int, set[int]] = {s.id: set() for s in sites}
    lamps = dict.fromkeys(sums, 0)
    unpriced = dict.fromkeys(sums, 0)
    hired: set[int] = set()
    for ln in lines:
        orders[ln.site_id].add(ln.order_id)
        lamps[ln.site_id] += ln.fitted
        c = costs.get((ln.area_id, ln.lamp_type_id))
        if c is None:
            unpriced[ln.site_id] += ln.fitted
            continue
        if ln.kind == WorkOrderKind.GROUP_RELAMP:
            priced = group_cost(c, ln.fitted, hire=ln.order_id not in hired)
            hired.add(ln.order_id)  # one hire per group relamp visit
        else:
            priced = spot_cost(c, ln.fitted)
        for cat, amount in priced.items():
            sums[ln.site_id][cat] = sums[ln.site_id].get(cat, 0.0) + amount
    return {
        s.id: SiteSpend(
            site_id=s.id,
            currency=s.currency,
            since=year_start(s, at),
            orders=len(orders[s.id]),
            lamps=lamps[s.id],
            by_category={k: round(v, 2) for k, v in sums[s.id].items()},
            unpriced_lamps=unpriced[s.id],
        )
        for s in sites
    }


def spend_this_year(
    session: Session, sites: Sequence[Site], plans: Iterable[AreaPlan], at: datetime
) -> dict[int, SiteSpend]:
    """This calendar year's spend per site so far (plans: the sites' current area plans)."""
    return price_spend(sites, load_done_lines(session, sites, at), plans, at)
