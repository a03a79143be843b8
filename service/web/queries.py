"""Thin read queries for the pages (counts per site, fixtures by tag)."""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass
from datetime import date, datetime

from sqlalchemy import case, func, select
from sqlalchemy.orm import Session

from service.catalogue.models import LampType
from service.events.models import BurnoutReport
from service.register.models import Area, Fixture, LampPosition, Site
from service.workorders.models import WorkOrder

OPEN_ORDER_STATES = ("draft", "issued", "in_progress")


@dataclass(frozen=True)
class SiteSummary:
    """A site with its open work: the counts of the overview's row."""

    site: Site
    open_burnouts: int
    open_orders: int
    due_orders: int


def site_summaries(session: Session, today: date) -> list[SiteSummary]:
    """Every site by name with its open burnouts, open orders and orders due by today.

    One statement: the sites joined to two grouped counts (no ORM rows for the counts).
    """
    burnouts = (
        select(BurnoutReport.site_id, func.count().label("n"))
        .where(BurnoutReport.status != "closed")
        .group_by(BurnoutReport.site_id)
        .subquery()
    )
    due = case((WorkOrder.due_on <= today, 1), else_=0)
    orders = (
        select(
            WorkOrder.site_id,
            func.count().label("n"),
            func.coalesce(func.sum(due), 0).label("due"),
        )
        .where(WorkOrder.state.in_(OPEN_ORDER_STATES))
        .group_by(WorkOrder.site_id)
        .subquery()
    )
    stmt = (
        select(
            Site,
            func.coalesce(burnouts.c.n, 0),
            func.coalesce(orders.c.n, 0),
            func.coalesce(orders.c.due, 0),
        )
        .outerjoin(burnouts, burnouts.c.site_id == Site.id)
        .outerjoin(orders, orders.c.site_id == Site.id)
        .order_by(Site.name, Site.id)
    )
    return [SiteSummary(r[0], int(r[1]), int(r[2]), int(r[3])) for r in session.execute(stmt)]


def sites(session: Session) -> Sequence[Site]:
    """Every site by name."""
    return session.scalars(select(Site).order_by(Site.name)).all()


def fixture_by_tag(session: Session, site_id: int, tag: str) -> Fixture | None:
    """The fixture with this tag at a site, or None."""
    stmt = select(Fixture).where(Fixture.site_id == site_id, Fixture.tag == tag)
    return session.scalars(stmt).first()


def positions_of(session: Session, fixture_id: int) -> Sequence[LampPosition]:
    """A fixture's lamp positions in order."""
    stmt = select(LampPosition).where(LampPosition.fixture_id == fixture_id)
    return session.scalars(stmt.order_by(LampPosition.position_no)).all()


def area_name(session: Session, area_id: int) -> str:
    """An area's name, or '' when gone."""
    area = session.get(Area, area_id)
    return area.name if area else ""


def site_names(session: Session) -> dict[int, str]:
    """Site names by id."""
    return {s.id: s.name for s in sites(session)}


def orders(session: Session, site_id: int | None, state: str | None) -> Sequence[WorkOrder]:
    """Work orders filtered by site and state, due first."""
    stmt = select(WorkOrder)
    if site_id is not None:
        stmt = stmt.where(WorkOrder.site_id == site_id)
    if state:
        stmt = stmt.where(WorkOrder.state == state)
    return session.scalars(stmt.order_by(WorkOrder.due_on, WorkOrder.id).limit(500)).all()


@dataclass(frozen=True)
class OpenReport:
    """An open or batched burnout report in an area, for its page."""

    report_id: int
    fixture_tag: str
    position_no: int
    reported_at: datetime
    status: str


def open_reports_in_area(session: Session, area_id: int) -> list[OpenReport]:
    """The area's burnout reports not yet closed, newest first (at most 200)."""
    stmt = (
        select(
            BurnoutReport.id,
            Fixture.tag,
            LampPosition.position_no,
            BurnoutReport.reported_at,
            BurnoutReport.status,
        )
        .join(Fixture, Fixture.id == BurnoutReport.fixture_id)
        .join(LampPosition, LampPosition.id == BurnoutReport.position_id)
        .where(BurnoutReport.area_id == area_id, BurnoutReport.status != "closed")
        .order_by(BurnoutReport.reported_at.desc(), BurnoutReport.id.desc())
        .limit(200)
    )
    return [OpenReport(int(r[0]), r[1], int(r[2]), r[3], r[4]) for r in session.execute(stmt)]


@dataclass(frozen=True)
class FixtureRisk:
    """One fixture of an area page: its lamps' ages and the chance one fails soon."""

    tag: str
    location: str | None
    positions: int
    dark: int
    max_age_h: float  # burn hours of its oldest lamp
    p_fail: float  # highest chance over its burning lamps of failing within the horizon


RISK_WEEKS = 13.0  # the area page's risk horizon, weeks


def fixture_risks(session: Session, area_id: int, limit: int = 300) -> list[FixtureRisk]:
    """An area's fixtures, riskiest first, from the forecasting service (at most `limit`)."""
    from service.forecasting.service import forecast

    pf = forecast(session, area_id=area_id, horizon_weeks=RISK_WEEKS).positions
    ages = pf.ages
    if ages.size == 0:
        return []
    by_fixture: dict[int, list[int]] = {}
    for i, f in enumerate(ages.fixture_id.tolist()):
        by_fixture.setdefault(int(f), []).append(i)
    info = {
        int(r[0]): (str(r[1]), r[2])
        for r in session.execute(
            select(Fixture.id, Fixture.tag, Fixture.location).where(Fixture.area_id == area_id)
        )
    }
    rows = []
    for f, idx in by_fixture.items():
        burning = [i for i in idx if not ages.burned_out[i]]
        tag, location = info.get(f, (str(f), None))
        rows.append(
            FixtureRisk(
                tag=tag,
                location=location,
                positions=len(idx),
                dark=len(idx) - len(burning),
                max_age_h=float(max(ages.age_h[i] for i in idx)),
                p_fail=float(max((pf.p_fail[i] for i in burning), default=0.0)),
            )
        )
    rows.sort(key=lambda r: (-r.dark, -r.p_fail, r.tag))
    return rows[:limit]


def lamp_types(session: Session) -> Sequence[LampType]:
    """The catalogue by code."""
    return session.scalars(select(LampType).order_by(LampType.code)).all()
