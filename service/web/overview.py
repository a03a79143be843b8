"""The overview page's content: a row per site, the areas due soonest, the weekly chart.

A team lead reads one line per site (open burnouts, open and due orders, group relamps
due soon and overdue, this year's spend) and the areas due soonest; each site's page
lists all its areas. So the page carries counts and at most DUE_ROWS areas, not every
plan of the portfolio (a 1,000-area portfolio would be a quarter-megabyte page).
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass
from datetime import date, datetime

from sqlalchemy.orm import Session

from service.planning.portfolio import portfolio_plans
from service.planning.service import AreaPlan
from service.register.models import Site
from service.web import charts, queries
from service.web.charts import Chart
from service.workorders.repository import last_group_relamps
from service.workorders.spend import SiteSpend, spend_this_year

DUE_SOON_DAYS = 8 * 7  # the overview lists group relamps due within this many days
DUE_ROWS = 40  # at most this many areas in the due-soon list (soonest first)


@dataclass(frozen=True, kw_only=True)
class SiteRow:
    """One site's line of the overview."""

    site: Site
    open_burnouts: int
    open_orders: int
    due_orders: int  # open orders due by today
    areas: int  # active areas with a plan
    relamps_due: int  # areas whose group relamp falls due within DUE_SOON_DAYS
    relamps_overdue: int  # of those, areas already past their relamp point
    spend: SiteSpend | None


@dataclass(frozen=True, kw_only=True)
class DueArea:
    """One area of the due-soon list."""

    area_id: int
    area_name: str
    site_name: str
    due_on: date
    overdue: bool
    why: str  # what set the interval (the plan's binding limit), in words


@dataclass(frozen=True, kw_only=True)
class Overview:
    """Everything the overview template shows."""

    rows: list[SiteRow]
    due: list[DueArea]  # soonest first, at most DUE_ROWS
    due_total: int  # areas due within DUE_SOON_DAYS, listed or not
    due_soon_weeks: int
    weekly: Chart | None


def _soon(plans: Sequence[AreaPlan], today: date) -> list[AreaPlan]:
    """The plans whose group relamp falls due within DUE_SOON_DAYS, soonest first."""
    soon = [p for p in plans if p.due_on is not None and (p.due_on - today).days < DUE_SOON_DAYS]
    return sorted(soon, key=lambda p: (p.due_on or date.max, p.site.name, p.area.name))


def _due_area(p: AreaPlan) -> DueArea:
    first = p.first
    assert first is not None and first.due_on is not None  # only plans with a due date
    return DueArea(
        area_id=p.area.id,
        area_name=p.area.name,
        site_name=p.site.name,
        due_on=first.due_on,
        overdue=first.overdue,
        why=first.group.plan.binding.replace("_", " "),
    )


def site_rows(
    summaries: Sequence[queries.SiteSummary],
    plans: Sequence[AreaPlan],
    soon: Sequence[AreaPlan],
    spend: dict[int, SiteSpend],
) -> list[SiteRow]:
    """Each site's counts beside its plan counts and spend (pure)."""
    areas: dict[int, int] = {}
    due: dict[int, int] = {}
    overdue: dict[int, int] = {}
    for p in plans:
        areas[p.site.id] = areas.get(p.site.id, 0) + 1
    for p in soon:
        due[p.site.id] = due.get(p.site.id, 0) + 1
        if p.first is not None and p.first.overdue:
            overdue[p.site.id] = overdue.get(p.site.id, 0) + 1
    return [
        SiteRow(
            site=s.site,
            open_burnouts=s.open_burnouts,
            open_orders=s.open_orders,
            due_orders=s.due_orders,
            areas=areas.get(s.site.id, 0),
            relamps_due=due.get(s.site.id, 0),
            relamps_overdue=overdue.get(s.site.id, 0),
            spend=spend.get(s.site.id),
        )
        for s in summaries
    ]


def overview(session: Session, now: datetime) -> Overview:
    """The overview from one load of the portfolio (plans, chart and spend share it)."""
    today = now.date()
    summaries = queries.site_summaries(session, today)  # the sites, with their counts
    sites = [s.site for s in summaries]
    pf = portfolio_plans(session, sites, now, last_relamps=last_group_relamps)
    spend = spend_this_year(session, sites, pf.plans, now)
    soon = _soon(pf.plans, today)
    due_days = [p.due_on for p in pf.plans if p.due_on is not None]
    weekly = charts.weekly_burnouts(session, now, due_days, today, loaded=(pf.ages, pf.types))
    return Overview(
        rows=site_rows(summaries, pf.plans, soon, spend),
        due=[_due_area(p) for p in soon[:DUE_ROWS]],
        due_total=len(soon),
        due_soon_weeks=DUE_SOON_DAYS // 7,
        weekly=weekly,
    )
