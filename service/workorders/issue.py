"""Build group and spot orders for a site in bulk (Core inserts, one statement per table).

Used by the weekly run (orders "issued", keyed by ISO week) and by a person creating one
order by hand (a "draft" without a week). A group order covers every fixture of the lamp
types due in the area; a spot order batches the area's open burnout reports, which become
"ordered" and point at it.
"""

from __future__ import annotations

from collections.abc import Callable, Sequence
from dataclasses import dataclass, field
from datetime import date, datetime, timedelta
from typing import Any

from sqlalchemy import insert, select
from sqlalchemy.orm import Session

from service.catalogue.models import LampType
from service.events import reports
from service.events.models import BurnoutReport
from service.planning.engine import PlanCache
from service.planning.positions import load_positions
from service.planning.service import AreaPlan, local_today, plan_areas
from service.register.models import Area, Fixture, LampPosition, Site
from service.workorders.models import WorkOrder, WorkOrderLine
from service.workorders.repository import last_group_relamps
from service.workorders.texts import LampContent, disposal_instructions, safety_cautions

OPEN_STATES = ("draft", "issued", "in_progress")
GROUP, SPOT = "group_relamp", "spot_replacement"


@dataclass
class IssueResult:
    """Orders made and those skipped because the week already had them."""

    created: list[tuple[int, int, str]] = field(default_factory=list)  # (order, area, kind)
    already_there: int = 0

    def count(self, kind: str) -> int:
        """Orders created of one kind."""
        return sum(1 for _, _, k in self.created if k == kind)


def _contents(session: Session, ids: set[int]) -> dict[int, LampContent]:
    rows = session.execute(
        select(
            LampType.id,
            LampType.code,
            LampType.technology,
            LampType.contains_mercury,
            LampType.rupture_risk,
        ).where(LampType.id.in_(list(ids)))
    ).all()
    return {r[0]: LampContent(r[1], r[2], bool(r[3]), bool(r[4])) for r in rows}


def _fixtures(session: Session, site_id: int, area_ids: Sequence[int]) -> dict[int, list[Any]]:
    """Fixtures of these areas: area id -> [(id, tag, location, lamp type)], by tag."""
    out: dict[int, list[Any]] = {}
    if not area_ids:
        return out
    stmt = (
        select(Fixture.id, Fixture.area_id, Fixture.tag, Fixture.location, Fixture.lamp_type_id)
        .where(Fixture.site_id == site_id, Fixture.area_id.in_(list(area_ids)))
        .where(Fixture.retired_at.is_(None))
        .order_by(Fixture.area_id, Fixture.location, Fixture.tag)
    )
    for fid, aid, tag, loc, lt in session.execute(stmt).all():
        out.setdefault(aid, []).append((fid, tag, loc, lt))
    return out


def _positions(session: Session, site_id: int, area_ids: Sequence[int]) -> dict[int, list[Any]]:
    """fixture id -> [(position id, position no)]."""
    out: dict[int, list[Any]] = {}
    if not area_ids:
        return out
    stmt = (
        select(LampPosition.fixture_id, LampPosition.id, LampPosition.position_no)
        .join(Fixture, Fixture.id == LampPosition.fixture_id)
        .where(Fixture.site_id == site_id, Fixture.area_id.in_(list(area_ids)))
        .where(Fixture.retired_at.is_(None))
        .order_by(LampPosition.fixture_id, LampPosition.position_no)
    )
    for fid, pid, no in session.execute(stmt).all():
        out.setdefault(fid, []).append((pid, no))
    return out


def _open_reports(session: Session, site_id: int, area_ids: Sequence[int] | None) -> list[Any]:
    stmt = (
        select(
            BurnoutReport.id,
            BurnoutReport.area_id,
            BurnoutReport.fixture_id,
            BurnoutReport.position_id,
        )
        .where(BurnoutReport.site_id == site_id, BurnoutReport.status == "open")
        .where(
            BurnoutReport.fixture_id.not_in(
                select(Fixture.id).where(Fixture.retired_at.is_not(None))
            )
        )
        .order_by(BurnoutReport.area_id, BurnoutReport.fixture_id, BurnoutReport.id)
    )
    if area_ids is not None:
        stmt = stmt.where(BurnoutReport.area_id.in_(list(area_ids)))
    return list(session.execute(stmt).all())


def _busy_areas(session: Session, site_id: int) -> set[int]:
    """Areas with a group order still open (no second group order until it is closed)."""
    stmt = select(WorkOrder.area_id).where(
        WorkOrder.site_id == site_id, WorkOrder.kind == GROUP, WorkOrder.state.in_(OPEN_STATES)
    )
    return set(session.scalars(stmt).all())


def _existing(session: Session, site_id: int, iso_week: str | None) -> set[tuple[int, str]]:
    if iso_week is None:
        return set()
    stmt = select(WorkOrder.area_id, WorkOrder.kind).where(
        WorkOrder.site_id == site_id, WorkOrder.iso_week == iso_week
    )
    return {(a, k) for a, k in session.execute(stmt).all()}


def issue_orders(
    session: Session,
    site: Site,
    *,
    at: datetime,
    iso_week: str | None,
    run_id: int | None,
    state: str,
    lookahead_weeks: int,
    area_id: int | None = None,
    kinds: Sequence[str] = (GROUP, SPOT),
    whole_area: bool = False,
    cache: PlanCache | None = None,
    checkpoint: Callable[[str], None] | None = None,
) -> IssueResult:
    """Create the group and spot orders a site (or one area) needs now; flushes, no commit."""
    result = IssueResult()
    today = local_today(site, at)
    horizon = today + timedelta(weeks=lookahead_weeks)
    q = select(Area).where(Area.site_id == site.id, Area.retired_at.is_(None)).order_by(Area.id)
    if area_id is not None:
        q = q.where(Area.id == area_id)
    areas = {a.id: a for a in session.scalars(q).all()}
    existing = _existing(session, site.id, iso_week)
    now = at

    # Which lamp types of which areas get a group relamp.
    group_types: dict[int, tuple[set[int], date, AreaPlan]] = {}
    if GROUP in kinds:
        busy = _busy_areas(session, site.id)  # an earlier group order is still open
        done = {a for a in areas if (a, GROUP) in existing}  # this week has it already
        result.already_there += len(done)
        todo = [a for a in areas.values() if a.id not in busy and a.id not in done]
        plans = []
        if todo:
            pos = load_positions(session, site_id=site.id, area_id=area_id, at=at)
            last = last_group_relamps(session, [a.id for a in todo])
            plans = plan_areas(session, site, todo, pos, at, None, cache, last_relamps=last)
        for plan in plans:
            aid = plan.area.id
            due_groups = [g for g in plan.groups if g.due_on is not None and g.due_on <= horizon]
            if whole_area:
                due_groups = list(plan.groups)
            if due_groups:
                soonest = min((g.due_on for g in due_groups if g.due_on), default=today)
                types = {g.lamp_type_id for g in due_groups}
                group_types[aid] = (types, max(soonest, today), plan)

    reports_by_area: dict[int, list[Any]] = {}
    if SPOT in kinds:
        for r in _open_reports(session, site.id, list(areas) if area_id is not None else None):
            if (r.area_id, SPOT) in existing:
                continue
            reports_by_area.setdefault(r.area_id, []).append(r)
        result.already_there += sum(1 for a, k in existing if k == SPOT and a in areas)

    wanted = sorted(set(group_types) | set(reports_by_area))
    fixtures = _fixtures(session, site.id, wanted)
    positions = _positions(session, site.id, list(group_types))
    lt_ids = {f[3] for aid in wanted for f in fixtures.get(aid, [])}
    contents = _contents(session, lt_ids)

    orders: list[dict[str, Any]] = []
    lines: list[list[dict[str, Any]]] = []
    report_links: list[list[int]] = []
    for aid in sorted(group_types):
        types, due, plan = group_types[aid]
        area = areas[aid]
        ls = []
        for fid, tag, loc, lt in fixtures.get(aid, []):
            if lt not in types:
                continue
            ps = positions.get(fid, [])
            if ps:
                ls.append(_line(fid, tag, loc, lt, contents[lt].code, ps, None))
        if not ls:
            continue
        qty = sum(x["quantity"] for x in ls)
        first = plan.first
        info = None
        if first is not None:
            p = first.group.plan
            info = {
                "interval_h": p.interval_h,
                "binding": p.binding,
                "group_age_h": first.group_age_h,
                "lamp_types": sorted(types),
            }
        used = [contents[x] for x in types]
        orders.append(
            _order(
                site,
                area,
                GROUP,
                state,
                iso_week,
                run_id,
                due,
                qty,
                qty * area.group_minutes_per_lamp,
                used,
                now,
                info,
            )
        )
        lines.append(ls)
        report_links.append([])
    fix_index = {f[0]: f for aid in reports_by_area for f in fixtures.get(aid, [])}
    pos_no = _position_numbers(
        session, [r.position_id for rs in reports_by_area.values() for r in rs]
    )
    for aid in sorted(reports_by_area):
        area = areas[aid]
        per_fixture: dict[int, list[Any]] = {}
        for r in reports_by_area[aid]:
            per_fixture.setdefault(r.fixture_id, []).append(r)
        ls = []
        for fid, rs in per_fixture.items():
            _, tag, loc, lt = fix_index[fid]
            ps = sorted(
                {(r.position_id, pos_no.get(r.position_id, 0)) for r in rs}, key=lambda x: x[1]
            )
            ls.append(_line(fid, tag, loc, lt, contents[lt].code, ps, [r.id for r in rs]))
        qty = sum(x["quantity"] for x in ls)
        used = [contents[lt] for lt in {x["lamp_type_id"] for x in ls}]
        orders.append(
            _order(
                site,
                area,
                SPOT,
                state,
                iso_week,
                run_id,
                today,
                qty,
                qty * area.spot_minutes_per_lamp,
                used,
                now,
                None,
            )
        )
        lines.append(ls)
        report_links.append([r.id for r in reports_by_area[aid]])
    if not orders:
        return result

    ids = (
        session.execute(
            insert(WorkOrder).returning(WorkOrder.id, sort_by_parameter_order=True), orders
        )
        .scalars()
        .all()
    )
    if checkpoint is not None:  # tests inject failures here: orders written, lines not yet
        checkpoint("orders_inserted")
    flat = []
    for oid, ls in zip(ids, lines, strict=True):
        for x in ls:
            x["work_order_id"] = oid
            flat.append(x)
    session.execute(insert(WorkOrderLine), flat)
    for oid, rs in zip(ids, report_links, strict=True):
        if rs:
            reports.take_for_order(session, rs, oid, at=now)
    for oid, o in zip(ids, orders, strict=True):
        result.created.append((oid, o["area_id"], o["kind"]))
    return result


def _position_numbers(session: Session, ids: list[int]) -> dict[int, int]:
    out: dict[int, int] = {}
    for i in range(0, len(ids), 5000):  # keep IN lists bounded
        chunk = ids[i : i + 5000]
        stmt = select(LampPosition.id, LampPosition.position_no).where(LampPosition.id.in_(chunk))
        out.update({a: b for a, b in session.execute(stmt).all()})
    return out


def _line(
    fid: int,
    tag: str,
    loc: str | None,
    lt: int,
    code: str,
    ps: list[Any],
    reports: list[int] | None,
) -> dict[str, Any]:
    return {
        "fixture_id": fid,
        "fixture_tag": tag,
        "location": loc,
        "lamp_type_id": lt,
        "lamp_type_code": code,
        "quantity": len(ps),
        "position_ids": [p[0] for p in ps],
        "position_nos": [p[1] for p in ps],
        "report_ids": reports,
        "outcome": None,
        "skip_reason": None,
        "extra": None,
    }


def _order(
    site: Site,
    area: Area,
    kind: str,
    state: str,
    iso_week: str | None,
    run_id: int | None,
    due: date,
    qty: int,
    minutes: float,
    lamps: list[LampContent],
    now: datetime,
    plan: dict[str, Any] | None,
) -> dict[str, Any]:
    return {
        "site_id": site.id,
        "area_id": area.id,
        "kind": kind,
        "state": state,
        "iso_week": iso_week,
        "run_id": run_id,
        "due_on": due,
        "access_method": area.access_method,
        "lamp_quantity": qty,
        "estimated_labour_h": round(minutes / 60.0, 2),  # hours
        "disposal_instructions": disposal_instructions(lamps),
        "safety_cautions": safety_cautions(lamps, area.access_method),
        "external_reference": None,
        "notes": None,
        "state_changed_at": now,
        "completed_at": None,
        "cancel_reason": None,
        "plan": plan,
        "created_at": now,
        "updated_at": now,
    }
