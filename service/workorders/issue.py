"""Build group and spot orders for a site in bulk (Core inserts, one statement per table).

Used by the weekly run (orders "issued", keyed by ISO week) and by a person creating one
order by hand (a draft without a week). A group order covers every fixture of the lamp
types due in the area; a spot order batches the area's open burnout reports, which become
"ordered" and point at it.

No double dispatch: an area that gets a group order gets no spot order. Its open reports go
onto the group order (report_ids on the lines flag those positions as reported dark; a
reported fixture of a lamp type not due gets a line of its reported positions only), and
any spot order still open in the area is covered by the group order (covered_by_order_id),
which settles it when done and releases it when cancelled. A spot order made while the area
has an open group order is covered by that group order from the start.

Catch-up: on a site with a weekly capacity (labour hours or money), the weekly run orders
only the due areas that the catch-up schedule (planning.site_schedule, planning.catch_up)
puts in this week; the others wait for their week's run. Each order's plan names its place.
Group orders still open from earlier weeks (committed_orders) take their labour hours and
money off this week's capacity first.

Lamp choice: a group order's lines fit the lamp its plan chose (choice_hooks: switched
lines), and its cautions and disposal cover both the lamps fitted and those taken out.
"""

from __future__ import annotations

from collections import Counter
from collections.abc import Sequence
from dataclasses import dataclass, field, replace
from datetime import date, datetime, timedelta
from functools import partial
from typing import Any

import numpy as np
from sqlalchemy import Table, case, func, inspect, or_, select, update
from sqlalchemy.orm import Session

from service.catalogue.models import LampType
from service.db.bulk import id_pairs, in_ids
from service.events import reports
from service.events.models import BurnoutReport, BurnoutReportState
from service.planning.catch_up import Committed
from service.planning.group_plan import PlanCache
from service.planning.positions import PositionArrays, load_positions
from service.planning.service import AreaPlan, local_today, plan_areas
from service.planning.site_schedule import capacity_of, site_schedule
from service.readings.repository import float_matrix
from service.register.models import Area, Fixture, LampPosition, Site
from service.uploads.write import write_rows
from service.workorders import choice_hooks, stock_hooks
from service.workorders.models import (
    OPEN_STATES,
    WorkOrder,
    WorkOrderKind,
    WorkOrderLine,
    WorkOrderState,
)
from service.workorders.repository import last_group_relamps
from service.workorders.texts import (
    LampContent,
    disposal_instructions,
    region_of,
    safety_cautions,
)

GROUP, SPOT = WorkOrderKind.GROUP_RELAMP, WorkOrderKind.SPOT_REPLACEMENT
__all__ = ["GROUP", "OPEN_STATES", "SPOT", "IssueResult", "issue_orders"]

_ORDERS: Table = WorkOrder.__table__  # type: ignore[assignment]
_LINES: Table = WorkOrderLine.__table__  # type: ignore[assignment]


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
    """Active fixtures of these areas: area id -> [(id, tag, location, lamp type)], by tag.

    The driver's own tuples (plain ints and strings, no result processing): no Row object
    for each of a site's ten thousand fixtures.
    """
    out: dict[int, list[Any]] = {}
    if not area_ids:
        return out
    stmt = (
        select(Fixture.area_id, Fixture.id, Fixture.tag, Fixture.location, Fixture.lamp_type_id)
        .where(Fixture.site_id == site_id, in_ids(session, Fixture.area_id, area_ids))
        .where(Fixture.retired_at.is_(None))
        .order_by(Fixture.area_id, Fixture.location, Fixture.tag)
    )
    result = session.connection().execute(stmt)
    try:
        rows = result.cursor.fetchall() if result.cursor is not None else []
    finally:
        result.close()
    for aid, *rest in rows:
        out.setdefault(aid, []).append(tuple(rest))
    return out


Slots = tuple[list[int], list[int]]  # a fixture's position ids and their numbers, by number


def _positions(session: Session, fixture_ids: Sequence[int]) -> dict[int, Slots]:
    """fixture id -> (position ids, position nos) by position no, from one numeric query.

    By the fixtures' ids (one bound array: the unique index on fixture and position no),
    not by a join on the site's fixtures, which the planner answered with a scan of every
    position of the portfolio, once per site. Plain columns into numpy
    (readings.repository.float_matrix), sorted there: no ORM rows and no server sort.
    """
    if not fixture_ids:
        return {}
    stmt = select(LampPosition.fixture_id, LampPosition.position_no, LampPosition.id).where(
        in_ids(session, LampPosition.fixture_id, fixture_ids)
    )
    m = float_matrix(session, stmt, 3).astype(np.int64)  # ids and numbers: exact in a float
    m = m[np.lexsort((m[:, 1], m[:, 0]))]  # by fixture, then position no
    fids, starts = np.unique(m[:, 0], return_index=True)
    bounds = [*starts.tolist(), len(m)]
    ids, nos = m[:, 2].tolist(), m[:, 1].tolist()
    return {  # list slices: no tuple per position (a few hundred thousand of them)
        f: (ids[a:b], nos[a:b])
        for f, a, b in zip(fids.tolist(), bounds[:-1], bounds[1:], strict=True)
    }


def _open_reports(
    session: Session,
    site_id: int,
    area_ids: Sequence[int] | None,
    states: Sequence[str] = (BurnoutReportState.OPEN,),
) -> list[Any]:
    """Reports of the site (or these areas) in these states, retired fixtures' included.

    The caller drops those of retired fixtures against the active fixtures it reads
    anyway (_load_work): a test on the fixtures here scanned the whole fixtures table per
    site (there is no index on retired_at).
    """
    stmt = (
        select(
            BurnoutReport.id,
            BurnoutReport.area_id,
            BurnoutReport.fixture_id,
            BurnoutReport.position_id,
            BurnoutReport.status,
        )
        .where(BurnoutReport.site_id == site_id, BurnoutReport.status.in_(list(states)))
        .order_by(BurnoutReport.area_id, BurnoutReport.fixture_id, BurnoutReport.id)
    )
    if area_ids is not None:
        stmt = stmt.where(BurnoutReport.area_id.in_(list(area_ids)))
    return list(session.execute(stmt).all())


@dataclass
class _Work:
    """What a run's orders are built from (_load_work)."""

    fixtures: dict[int, list[Any]]  # area id -> its active fixtures (_fixtures)
    positions: dict[int, Slots]  # the due fixtures' positions (_positions)
    per_area: dict[int, list[Any]]  # area id -> its not-closed reports of active fixtures
    pos_no: dict[int, int]  # a reported position's number
    contents: dict[int, LampContent]  # the fixtures' lamp types


def _load_work(
    session: Session,
    site_id: int,
    areas: dict[int, Area],
    group_types: dict[int, tuple[set[int], date, AreaPlan]],
    scope: list[int] | None,
) -> _Work:
    """Reports, fixtures, positions and lamp contents of the areas getting orders: 5 queries."""
    # Not-closed reports in scope: open ones get an order; ordered ones (on an open spot
    # order a new group order will cover) only flag their positions on the group order.
    states = (BurnoutReportState.OPEN, BurnoutReportState.ORDERED)
    reports = [r for r in _open_reports(session, site_id, scope, states) if r.area_id in areas]
    wanted = sorted(set(group_types) | {r.area_id for r in reports})
    fixtures = _fixtures(session, site_id, wanted)
    active = {f[0] for fs in fixtures.values() for f in fs}
    reports = [r for r in reports if r.fixture_id in active]  # retired fixtures: no new work
    due = [f[0] for a, g in group_types.items() for f in fixtures.get(a, []) if f[3] in g[0]]
    per_area: dict[int, list[Any]] = {}
    for r in reports:
        per_area.setdefault(r.area_id, []).append(r)
    return _Work(
        fixtures=fixtures,
        positions=_positions(session, due),
        per_area=per_area,
        pos_no=_position_numbers(session, [r.position_id for r in reports]),
        contents=_contents(session, {f[3] for fs in fixtures.values() for f in fs}),
    )


def _busy_areas(session: Session, site_id: int) -> dict[int, int]:
    """Areas with a group order still open -> that order (no second one until it is closed)."""
    stmt = select(WorkOrder.area_id, WorkOrder.id).where(
        WorkOrder.site_id == site_id, WorkOrder.kind == GROUP, WorkOrder.state.in_(OPEN_STATES)
    )
    return {a: o for a, o in session.execute(stmt).all()}


def cover_spot_orders(session: Session, group_orders: dict[int, int], at: datetime) -> None:
    """Let new group orders (area id -> order id) cover their areas' open spot orders.

    One UPDATE ... FROM a table of (area, order) pairs bound as two arrays (db.bulk); the
    spot orders it changed are expired in the session, so loaded ones see it.
    """
    if not group_orders:
        return
    areas = sorted(group_orders)
    pairs = id_pairs(session, ("area_id", "order_id"), areas, [group_orders[a] for a in areas])
    stmt = (
        update(WorkOrder)
        .where(
            WorkOrder.area_id == pairs.c.area_id,
            WorkOrder.kind == SPOT,
            WorkOrder.state.in_(OPEN_STATES),
            WorkOrder.covered_by_order_id.is_(None),
        )
        .values(
            covered_by_order_id=pairs.c.order_id,
            updated_at=at,
            version=WorkOrder.version + 1,  # Core UPDATE: bump the ORM's version by hand
        )
        .returning(WorkOrder.id)
    )
    opts = {"synchronize_session": False}  # loaded spot orders are expired below instead
    changed = set(session.execute(stmt, execution_options=opts).scalars().all())
    for obj in list(session.identity_map.values()):
        if isinstance(obj, WorkOrder):
            ident = inspect(obj).identity  # the key held, without loading an expired row
            if ident is not None and ident[0] in changed:
                session.expire(obj, ["covered_by_order_id", "updated_at", "version"])


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
) -> IssueResult:
    """Create the group and spot orders a site (or one area) needs now; flushes, no commit."""
    result = IssueResult()
    today = local_today(site, at)
    q = select(Area).where(Area.site_id == site.id, Area.retired_at.is_(None)).order_by(Area.id)
    if area_id is not None:
        q = q.where(Area.id == area_id)
    areas = {a.id: a for a in session.scalars(q).all()}
    existing = _existing(session, site.id, iso_week)
    busy = _busy_areas(session, site.id)  # an earlier group order is still open
    group_types: dict[int, tuple[set[int], date, AreaPlan]] = {}
    if GROUP in kinds:
        done = {a for a in areas if (a, GROUP) in existing}  # this week has it already
        result.already_there += len(done)
        todo = [a for a in areas.values() if a.id not in busy and a.id not in done]
        ordered = [areas[a] for a in sorted(done)]  # scheduled with the rest (catch-up)
        group_types = _due_types(
            session,
            site,
            todo,
            area_id,
            at,
            today,
            lookahead_weeks,
            whole_area,
            cache,
            ordered,
            iso_week,
        )
    scope = list(areas) if area_id is not None else None
    work = _load_work(session, site.id, areas, group_types, scope)
    fixtures, per_area, pos_no, contents = work.fixtures, work.per_area, work.pos_no, work.contents
    mk = partial(
        _order, site, state=state, iso_week=iso_week, run_id=run_id, contents=contents, now=at
    )
    built: list[Built] = []
    for aid in sorted(group_types):
        lines = _group_lines(
            fixtures.get(aid, []), group_types[aid][0], work.positions, per_area.get(aid, []),
            pos_no, contents,
        )  # fmt: skip
        if lines:
            built.append(
                _group_order(session, site, areas[aid], group_types[aid], lines, per_area, mk)
            )
    if SPOT in kinds:
        result.already_there += sum(1 for a, k in existing if k == SPOT and a in areas)
        skip = {o["area_id"] for o, _, _ in built} | {a for a, k in existing if k == SPOT}
        built += _spot_orders(areas, per_area, skip, fixtures, pos_no, busy, today, mk)
    if built:
        _write(session, built, result, at)
        if state == WorkOrderState.ISSUED:  # created issued (the weekly run): reserve now
            _reserve(session, site.id, built, [oid for oid, _, _ in result.created])
    return result


Built = tuple[dict[str, Any], list[dict[str, Any]], list[int]]  # order, lines, reports taken


def _group_order(
    session: Session,
    site: Site,
    area: Area,
    due: tuple[set[int], date, AreaPlan],
    lines: list[dict[str, Any]],
    per_area: dict[int, list[Any]],
    mk: Any,
) -> Built:
    """One area's group order: its plan figures, the chosen lamp on its lines, the reports."""
    types, due_on, plan = due
    taken = [r.id for r in per_area.get(area.id, []) if r.status == BurnoutReportState.OPEN]
    info = _plan_info(plan, types, session)
    _switch_lines(session, site, info, lines, mk.keywords["contents"])
    order = mk(area, GROUP, due_on, lines, area.group_minutes_per_lamp, info)
    return order, lines, taken


def _spot_orders(
    areas: dict[int, Area],
    per_area: dict[int, list[Any]],
    skip: set[int],
    fixtures: dict[int, list[Any]],
    pos_no: dict[int, int],
    busy: dict[int, int],
    today: date,
    mk: Any,
) -> list[Built]:
    """A spot order per area with open reports, unless grouped or already ordered this week."""
    out: list[Built] = []
    for aid in sorted(per_area):
        rs = [r for r in per_area[aid] if r.status == BurnoutReportState.OPEN]
        if not rs or aid in skip:
            continue
        ls = _spot_lines(rs, fixtures.get(aid, []), pos_no, mk.keywords["contents"])
        order = mk(areas[aid], SPOT, today, ls, areas[aid].spot_minutes_per_lamp, None)
        order["covered_by_order_id"] = busy.get(aid)  # the open group order takes it over
        out.append((order, ls, [r.id for r in rs]))
    return out


def _switch_lines(
    session: Session,
    site: Site,
    info: dict[str, Any] | None,
    lines: list[dict[str, Any]],
    contents: dict[int, LampContent],
) -> None:
    """The chosen lamp onto a group order's lines (choice_hooks: switched lines)."""
    sw = choice_hooks.switches(session, site, info)
    if sw:
        choice_hooks.apply_switches(lines, sw)
        fit = {x["lamp_type_id"] for x in lines} - contents.keys()
        if fit:
            contents.update(_contents(session, fit))


def _reserve(session: Session, site_id: int, built: list[Built], order_ids: list[int]) -> None:
    """Reserve stocked lamps for orders just created issued (nothing when none are stocked)."""
    if not order_ids or not stock_hooks.site_stocks_anything(session, site_id):
        return
    needs: dict[int, Counter[int]] = {}
    for oid, (_, lines, _) in zip(order_ids, built, strict=True):
        need = needs[oid] = Counter()
        for x in lines:
            need[x["lamp_type_id"]] += x["quantity"]
    stock_hooks.on_created_issued(session, site_id, needs)


def _due_types(
    session: Session,
    site: Site,
    todo: list[Area],
    area_id: int | None,
    at: datetime,
    today: date,
    lookahead_weeks: int,
    whole_area: bool,
    cache: PlanCache | None,
    ordered: list[Area],
    iso_week: str | None,
) -> dict[int, tuple[set[int], date, AreaPlan]]:
    """Which lamp types of which areas get a group relamp, with the due date and the plan.

    On a site with a weekly capacity the weekly run keeps those its catch-up puts in this week.
    """
    horizon = today + timedelta(weeks=lookahead_weeks)
    out: dict[int, tuple[set[int], date, AreaPlan]] = {}
    if not todo:
        return out
    pos = load_positions(session, site_id=site.id, area_id=area_id, at=at)
    last = last_group_relamps(session, [a.id for a in todo])
    for plan in plan_areas(session, site, todo, pos, at, None, cache, last_relamps=last):
        due_groups = [g for g in plan.groups if g.due_on is not None and g.due_on <= horizon]
        if whole_area:
            due_groups = list(plan.groups)
        if due_groups:
            soonest = min((g.due_on for g in due_groups if g.due_on), default=today)
            out[plan.area.id] = ({g.lamp_type_id for g in due_groups}, max(soonest, today), plan)
    if area_id is None and capacity_of(site).limited:
        return _this_week(session, site, out, ordered, pos, at, today, horizon, iso_week)
    return out


def committed_orders(session: Session, site: Site, iso_week: str | None) -> list[Committed]:
    """The site's group orders still open from other weeks (or made by hand), as load.

    Labour: the order's estimated hours. Money: its lamps at their unit price, those hours
    at the site's labour rate, the disposal fee per mercury lamp, and the area's hire.
    """
    rows = session.execute(
        select(
            WorkOrder.id,
            WorkOrder.area_id,
            WorkOrder.access_method,
            WorkOrder.estimated_labour_h,
            Area.equipment_hire_per_visit,
        )
        .join(Area, Area.id == WorkOrder.area_id)
        .where(WorkOrder.site_id == site.id, WorkOrder.kind == GROUP)
        .where(WorkOrder.state.in_(OPEN_STATES))
        .where(or_(WorkOrder.iso_week.is_(None), WorkOrder.iso_week != (iso_week or "")))
        .order_by(WorkOrder.id)
    ).all()
    if not rows:
        return []
    mercury = case((LampType.contains_mercury, WorkOrderLine.quantity), else_=0)
    money = dict(
        session.execute(
            select(
                WorkOrderLine.work_order_id,
                func.sum(WorkOrderLine.quantity * LampType.unit_price)
                + func.sum(mercury) * float(site.disposal_fee_per_mercury_lamp or 0.0),
            )
            .join(LampType, LampType.id == WorkOrderLine.lamp_type_id)
            .where(WorkOrderLine.work_order_id.in_([r[0] for r in rows]))
            .group_by(WorkOrderLine.work_order_id)
        ).all()
    )
    rate = float(site.labour_rate_per_h)
    return [
        Committed(
            aid, access, float(h), float(money.get(oid) or 0.0) + float(h) * rate, float(hire)
        )
        for oid, aid, access, h, hire in rows
    ]


def _this_week(
    session: Session,
    site: Site,
    due: dict[int, tuple[set[int], date, AreaPlan]],
    ordered: list[Area],
    pos: PositionArrays,
    at: datetime,
    today: date,
    horizon: date,
    iso_week: str | None,
) -> dict[int, tuple[set[int], date, AreaPlan]]:
    """Of the due areas, those the catch-up schedule puts in this week (capacity per site).

    The areas already ordered this week are scheduled with them, as in the week's first run,
    so a second run of the same week cannot fill the week's capacity twice; group orders
    still open from earlier weeks take their hours and money off this week first.
    """
    plans = [p for _, _, p in due.values()]
    if ordered:
        last = last_group_relamps(session, [a.id for a in ordered])
        plans += plan_areas(session, site, ordered, pos, at, None, None, last_relamps=last)
    committed = committed_orders(session, site, iso_week)
    sched = site_schedule(site, plans, today, horizon, committed)
    out: dict[int, tuple[set[int], date, AreaPlan]] = {}
    for aid, (types, due_on, plan) in due.items():
        slot = sched.slots.get(aid)
        if slot is not None and slot.week == 0:
            out[aid] = (types, due_on, replace(plan, catch_up=slot))
    return out


def _plan_info(plan: AreaPlan, types: set[int], session: Session) -> dict[str, Any] | None:
    first = plan.first
    if first is None:
        return None
    p = first.group.plan
    info: dict[str, Any] = {
        "interval_h": p.interval_h,
        "binding": p.binding,
        "group_age_h": first.group_age_h,
        "group_age_basis": plan.group_age_basis,
        "lamp_types": sorted(types),
    }
    if plan.catch_up is not None:  # placed by the catch-up schedule (planning.catch_up)
        c = plan.catch_up
        info["catch_up"] = {
            "risk_order": c.order,
            "shares_visit_with_area_id": c.shares_visit_with,
            "hire_charged": c.hire_charged,
            "over_capacity": c.over_capacity,
        }
    chosen = choice_hooks.order_choice(session, plan, types)
    if chosen is not None:
        info["lamp_choice"] = chosen  # the best option per lamp type (choice_hooks)
    return info


def _group_lines(
    fixtures: list[Any],
    types: set[int],
    positions: dict[int, Slots],
    reports: list[Any],
    pos_no: dict[int, int],
    contents: dict[int, LampContent],
) -> list[dict[str, Any]]:
    """Every fixture of the due types, plus the reported positions of any other fixture."""
    by_fixture: dict[int, list[Any]] = {}
    for r in reports:
        by_fixture.setdefault(r.fixture_id, []).append(r)
    ls = []
    for fid, tag, loc, lt in fixtures:
        rs = by_fixture.get(fid, [])
        if lt in types:
            pids, nos = positions.get(fid, ([], []))
            rids = [r.id for r in rs if r.position_id in pids] or None  # a few lamps a fixture
        else:  # not due: only its dark lamps, so no spot order is needed beside
            ps = sorted(
                {(r.position_id, pos_no.get(r.position_id, 0)) for r in rs}, key=lambda x: x[1]
            )
            pids, nos = [p[0] for p in ps], [p[1] for p in ps]
            rids = [r.id for r in rs] or None
        if pids:
            ls.append(_line(fid, tag, loc, lt, contents[lt].code, (pids, nos), rids))
    return ls


def _spot_lines(
    reports: list[Any],
    fixtures: list[Any],
    pos_no: dict[int, int],
    contents: dict[int, LampContent],
) -> list[dict[str, Any]]:
    """One line per reported fixture with its reported positions."""
    fix_index = {f[0]: f for f in fixtures}
    per_fixture: dict[int, list[Any]] = {}
    for r in reports:
        per_fixture.setdefault(r.fixture_id, []).append(r)
    ls = []
    for fid, rs in per_fixture.items():
        _, tag, loc, lt = fix_index[fid]
        ps = sorted({(r.position_id, pos_no.get(r.position_id, 0)) for r in rs}, key=lambda x: x[1])
        slots = ([p[0] for p in ps], [p[1] for p in ps])
        ls.append(_line(fid, tag, loc, lt, contents[lt].code, slots, [r.id for r in rs]))
    return ls


def _write(
    session: Session,
    built: list[tuple[dict[str, Any], list[dict[str, Any]], list[int]]],
    result: IssueResult,
    at: datetime,
) -> None:
    """Insert orders and lines, take the reports, and let group orders cover spot orders.

    Set-based: the orders and their lines each go through the bulk writer (COPY on
    PostgreSQL), the reports are taken and the spot orders covered each by one UPDATE ...
    FROM bound id arrays, not one per order; a 1,000-order weekly run used to spend most of
    its write time in per-order statements.
    """
    orders = [o for o, _, _ in built]
    names = list(orders[0])
    ids = write_rows(session, _ORDERS, {k: [o[k] for o in orders] for k in names}, return_ids=True)
    flat = []
    for oid, (_, ls, _) in zip(ids, built, strict=True):
        for x in ls:
            x["work_order_id"] = oid
            flat.append(x)
    if flat:
        # The bulk writer, not an ORM bulk insert: a 100,000-fixture weekly run writes tens
        # of thousands of lines.
        names = list(flat[0])
        write_rows(session, _LINES, {k: [x[k] for x in flat] for k in names})
    groups: dict[int, int] = {}
    order_of: dict[int, int] = {}  # report id -> the new order taking it
    for oid, (o, _, taken) in zip(ids, built, strict=True):
        order_of.update(dict.fromkeys(taken, oid))
        if o["kind"] == GROUP:
            groups.setdefault(o["area_id"], oid)  # one group order per area and run
        result.created.append((oid, o["area_id"], o["kind"]))
    if order_of:
        reports.take_for_orders(session, order_of, at=at)
    choice_hooks.record_choices(
        session, [(oid, o["plan"]) for oid, (o, _, _) in zip(ids, built, strict=True)]
    )
    # One UPDATE for every area, not one per group order (one crew visit, not two).
    cover_spot_orders(session, groups, at)


def _position_numbers(session: Session, ids: list[int]) -> dict[int, int]:
    """Position id -> its number (one bound array of ids)."""
    if not ids:
        return {}
    stmt = select(LampPosition.id, LampPosition.position_no).where(
        in_ids(session, LampPosition.id, ids)
    )
    return {a: b for a, b in session.execute(stmt).all()}


def _line(
    fid: int,
    tag: str,
    loc: str | None,
    lt: int,
    code: str,
    slots: Slots,
    reports: list[int] | None,
) -> dict[str, Any]:
    pids, nos = slots
    return {
        "fixture_id": fid,
        "fixture_tag": tag,
        "location": loc,
        "lamp_type_id": lt,
        "lamp_type_code": code,
        "quantity": len(pids),
        "position_ids": list(pids),
        "position_nos": list(nos),
        "report_ids": reports,
        "outcome": None,
        "skip_reason": None,
        "extra": None,
    }


def _order(
    site: Site,
    area: Area,
    kind: str,
    due: date,
    lines: list[dict[str, Any]],
    minutes_per_lamp: float,
    plan: dict[str, Any] | None,
    *,
    state: str,
    iso_week: str | None,
    run_id: int | None,
    contents: dict[int, LampContent],
    now: datetime,
) -> dict[str, Any]:
    """The row of one new order (lamp count, labour and cautions from its lines)."""
    qty = sum(x["quantity"] for x in lines)
    fitted = {x["lamp_type_id"] for x in lines}
    removed = {
        int(v) for x in lines if (v := (x["extra"] or {}).get("replaces_lamp_type_id")) is not None
    }
    lamps = [contents[lt] for lt in sorted(fitted | removed)]  # cautions and disposal of both
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
        "estimated_labour_h": round(qty * minutes_per_lamp / 60.0, 2),  # hours
        "disposal_instructions": disposal_instructions(lamps, region=region_of(site.time_zone)),
        "safety_cautions": safety_cautions(
            lamps,
            area.access_method,
            mounting_height_m=area.mounting_height_m,
            region=region_of(site.time_zone),
        ),
        "external_reference": None,
        "notes": None,
        "state_changed_at": now,
        "completed_at": None,
        "cancel_reason": None,
        "plan": plan,
        "covered_by_order_id": None,
        "created_at": now,
        "updated_at": now,
    }
