"""Demand, reorder points and the stock outlook of a storeroom, from the fleet forecast.

Loads each served site's positions (readings.ages), their life curves (the field fit where
it replaces the catalogue), the group relamp plans (planning) and the stock lines; the
arithmetic is the pure modules' (stock.demand, stock.reorder, stock.outlook).
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass, field
from datetime import date, datetime, timedelta

import numpy as np
from numpy.typing import NDArray
from sqlalchemy import select
from sqlalchemy.orm import Session

from service.catalogue.models import LampType
from service.catalogue.resolved import TypeTable
from service.config import get_settings
from service.db.base import utcnow
from service.forecasting.ranges import position_sd_ln_scale
from service.planning.portfolio import portfolio_plans
from service.planning.service import AreaPlan, LastRelamps, local_today
from service.readings.ages import PositionAges
from service.register.models import Site
from service.reliability.fleet import evaluate_fleet
from service.stock import demand, outlook, reorder
from service.stock.demand import FloatArray, IntArray, unique_rows
from service.stock.models import StockBalance
from service.stock.service import get_storeroom, site_ids_of


@dataclass(frozen=True)
class Options:
    """Horizon in weeks, cycle service level and breakage fraction (settings by default)."""

    weeks: int
    level: float
    breakage: float

    @classmethod
    def of(
        cls, weeks: int | None = None, level: float | None = None, breakage: float | None = None
    ) -> Options:
        """Options with the settings filling what is not given."""
        s = get_settings()
        return cls(
            weeks=weeks or s.stock_horizon_weeks,
            level=level or s.stock_service_level,
            breakage=s.stock_breakage_fraction if breakage is None else breakage,
        )


@dataclass(frozen=True)
class TypeDemand:
    """One lamp type's positions in a storeroom: cumulative spot curves and weekly demand."""

    lamp_type_id: int
    positions: int
    dark_now: int
    cum: FloatArray  # (n, H+1) cumulative expected spot replacements at week boundaries
    week: demand.WeekDemand
    nodes: demand.NodeDemand | None = None  # the spot demand at the scale's nodes


@dataclass(frozen=True)
class StoreDemand:
    """A storeroom's demand over the horizon, per lamp type."""

    storeroom_id: int
    as_of: datetime
    week_starts: list[date]
    options: Options
    types: dict[int, TypeDemand]


@dataclass(frozen=True)
class SiteCurves:
    """A site's positions over the horizon: spot curves, dark lamps, the plans' group lamps."""

    lamp_type_id: IntArray
    area_id: IntArray
    cum: FloatArray  # (n, H+1) cumulative expected spot replacements at week boundaries
    dark: NDArray[np.bool_]  # dark now: a lamp needed in the first week
    group_by_type: dict[int, IntArray]  # lamps of planned group relamps per week
    plans: list[AreaPlan]
    # Per lamp type, the same spot demand at the nodes of its lognormal scale (the mixture).
    nodes: dict[int, demand.NodeDemand] = field(default_factory=dict)


def group_weeks(
    area_id: IntArray, lamp_type_id: IntArray, due_week: dict[tuple[int, int], int], weeks: int
) -> IntArray:
    """Each position's group relamp week from (area, lamp type) -> week (weeks: none)."""
    out = np.full(area_id.size, weeks, dtype=np.int64)
    if not due_week or area_id.size == 0:
        return out
    # Ids are below 2**31 (service.api.ids), so area * 2**31 + type is one int64 key.
    pos_key = area_id.astype(np.int64) * 2**31 + lamp_type_id.astype(np.int64)
    keys = np.array([a * 2**31 + t for a, t in due_week], dtype=np.int64)
    vals = np.array(list(due_week.values()), dtype=np.int64)
    order = np.argsort(keys)
    keys, vals = keys[order], vals[order]
    at = np.minimum(np.searchsorted(keys, pos_key), keys.size - 1)
    hit = keys[at] == pos_key
    out[hit] = vals[at[hit]]
    return out


@dataclass(frozen=True)
class SiteLoad:
    """A site's active positions, their life curves, effective scales and area plans."""

    ages: PositionAges
    types: TypeTable | None  # None when the site has no positions
    scale_h: FloatArray  # each position's Weibull scale at its voltage and switching, hours
    plans: list[AreaPlan]


@dataclass(frozen=True)
class Portfolio:
    """Every served site's load from one portfolio load (planning.portfolio): demand, the
    to-order list and the budget share it instead of each planning every site again."""

    at: datetime
    sites: dict[int, SiteLoad]
    # The demand's site curves (with the mixture's nodes) already computed from this load,
    # by (site, weeks): storerooms serving one site share them, and a budget over the same
    # weeks reads them. Curves without nodes (the budget's, one ask per site) are not kept.
    memo: dict[tuple[int, int], SiteCurves] = field(default_factory=dict, compare=False, repr=False)

    def curves(self, site: Site, weeks: int, *, nodes: bool = True) -> SiteCurves:
        """A loaded site's curves over `weeks` (nodes: with the mixture's, memoised)."""
        key = (site.id, weeks)
        if key in self.memo:  # the curves with nodes hold those without
            return self.memo[key]
        sc = site_curves(self.sites[site.id], site, self.at, weeks, nodes=nodes)
        if nodes:
            self.memo[key] = sc
        return sc


def effective_scales(ages: PositionAges, types: TypeTable) -> FloatArray:
    """Each position's Weibull scale at its voltage and switching cycle (hours)."""
    k = types.index(ages.lamp_type_id, ages.ballast_kind)
    age = np.where(ages.burned_out, 0.0, ages.age_h)
    # The scale is the type's times the voltage and switching life factors: no horizon or
    # supply history enters it (reliability.fleet.evaluate_fleet).
    scale: FloatArray = evaluate_fleet(
        types.table, k, age, ages.voltage_v, ages.hours_per_start, 0.0
    ).scale_h
    return scale


def load_site(session: Session, site: Site, at: datetime, last_relamps: LastRelamps) -> SiteLoad:
    """One site's load (its positions, curves and plans) for demand and the budget."""
    return load_portfolio(session, [site], at, last_relamps, scoped=True).sites[site.id]


def load_portfolio(
    session: Session,
    sites: Sequence[Site],
    at: datetime,
    last_relamps: LastRelamps,
    *,
    scoped: bool = False,
) -> Portfolio:
    """Every given site's load from one load of the positions and one plan of them all.

    scoped: load only these sites' positions (else the whole portfolio's, masked per site).
    """
    pf = portfolio_plans(session, sites, at, last_relamps=last_relamps, scoped=scoped)
    scale = effective_scales(pf.ages, pf.types) if pf.ages.size else np.zeros(0)
    plans: dict[int, list[AreaPlan]] = {s.id: [] for s in sites}
    for p in pf.plans:
        plans[p.site.id].append(p)
    out: dict[int, SiteLoad] = {}
    for site in sites:
        mask = pf.ages.site_id == site.id
        ages = pf.ages.take(mask)
        if ages.size == 0:
            out[site.id] = SiteLoad(ages, None, np.zeros(0), [])
            continue
        out[site.id] = SiteLoad(ages, pf.types, scale[mask], plans[site.id])
    return Portfolio(at, out)


def position_cumulative(
    session: Session,
    site: Site,
    at: datetime,
    weeks: int,
    last_relamps: LastRelamps,
    *,
    loaded: Portfolio | None = None,
    nodes: bool = True,
) -> SiteCurves:
    """A site's per-position cumulative spot replacements, with its planned group relamps.

    loaded: the portfolio's load when the caller has one (else the site is loaded here);
    nodes: also the spot demand at the scale's nodes (the mixture; the budget needs none).
    """
    if loaded is not None and site.id in loaded.sites:
        return loaded.curves(site, weeks, nodes=nodes)
    sl = load_site(session, site, at, last_relamps)
    return site_curves(sl, site, at, weeks, nodes=nodes)


def site_curves(
    sl: SiteLoad, site: Site, at: datetime, weeks: int, *, nodes: bool = True
) -> SiteCurves:
    """position_cumulative from a site's load (pure); nodes: with the mixture's nodes."""
    ages, types = sl.ages, sl.types
    group_by_type: dict[int, IntArray] = {}
    if ages.size == 0 or types is None:
        empty = np.zeros((0, weeks + 1))
        return SiteCurves(ages.lamp_type_id, ages.area_id, empty, ages.burned_out, {}, [])
    k = types.index(ages.lamp_type_id, ages.ballast_kind)
    shape = types.table.shape
    scale = sl.scale_h
    age = np.where(ages.burned_out, 0.0, ages.age_h)
    rate = ages.burn_h_per_week  # burn hours per week
    # Planned group relamps: the week each (area, lamp type) is due, and its lamps.
    today = local_today(site, at)
    due_week: dict[tuple[int, int], int] = {}
    plans = sl.plans
    for plan in plans:
        for g in plan.groups:
            if g.due_on is None:
                continue
            wk = max((g.due_on - today).days, 0) // 7
            if wk < weeks:
                due_week[(plan.area.id, g.lamp_type_id)] = wk
                arr = group_by_type.setdefault(g.lamp_type_id, np.zeros(weeks, dtype=np.int64))
                arr[wk] += g.positions
    gw = group_weeks(ages.area_id, ages.lamp_type_id, due_week, weeks)
    # A dark lamp in an area whose group relamp falls in the first week gets its lamp from
    # the group order (its report goes onto it): counting it as spot demand too doubled it.
    dark = demand.dark_spot_lamps(ages.burned_out, gw)
    if not nodes:
        cum = alike_cumulative(shape, k, scale, age, rate, weeks, gw)
        return SiteCurves(ages.lamp_type_id, ages.area_id, cum, dark, group_by_type, plans)
    # The spot demand again at each node of the lamp type's uncertain scale (the forecast's
    # own spread, forecasting.ranges): its quantiles are the mixture's, not the nominal's.
    # Its middle node is the nominal scale: those are the positions' curves (cum).
    sd = position_sd_ln_scale(types, ages.lamp_type_id)
    per, nominal = demand.node_passes(shape, k, scale, age, rate, weeks, gw, sd, ages.lamp_type_id)
    if nominal is None:
        nominal = alike_cumulative(shape, k, scale, age, rate, weeks, gw)
    cum = nominal
    return SiteCurves(ages.lamp_type_id, ages.area_id, cum, dark, group_by_type, plans, per)


def alike_cumulative(
    shape: FloatArray,
    k: IntArray,
    scale: FloatArray,
    age: FloatArray,
    rate: FloatArray,
    weeks: int,
    group_week: IntArray,
) -> FloatArray:
    """Cumulative spot replacements at week boundaries 0..weeks per position, with the
    planned group relamps (group_week: the week one puts a new lamp in; weeks: none).

    Positions exactly alike in type row, scale, age and burn rate get the same curve of the
    lamp in place, and alike with the same group week the same cumulative: each distinct
    set is computed once and handed to its positions (a portfolio's 300,000 positions are
    often a few thousand such sets): the same numbers as one row per position.
    """
    h1 = weeks + 1
    rows, member = unique_rows(np.column_stack([k, scale, age, rate]).astype(np.float64))
    g_k = rows[:, 0].astype(np.int64)
    # Every week boundary in one pass (stock.demand.weekly_cumulative: one convolution per
    # row), not one delayed-renewal sum per boundary.
    before = demand.weekly_cumulative(shape, g_k, rows[:, 1], rows[:, 2], rows[:, 3], weeks)
    # Distinct (curve, group week) pairs: the relamp is applied once per pair.
    pairs, pm = unique_rows(np.column_stack([member, group_week]).astype(np.float64))
    r_idx, p_gw = pairs[:, 0].astype(np.int64), pairs[:, 1].astype(np.int64)
    p_k, p_scale, p_rate = g_k[r_idx], rows[r_idx, 1], rows[r_idx, 3]
    relamped = p_gw < weeks
    # After a group relamp the position holds a new lamp: N_0(w) = M(w), the renewal
    # function, scaled per position (M_eta(t) = M_1(t / eta), see forecasting.spot_replacements).
    after = np.zeros((pairs.shape[0], h1))
    steps = np.arange(h1, dtype=float)[None, :]
    for kk in np.unique(p_k[relamped]).tolist():
        sel = np.nonzero((p_k == kk) & relamped)[0]
        u = p_rate[sel][:, None] * steps / p_scale[sel][:, None]  # scales to each boundary
        curve = demand.renewal_reaching(float(shape[kk]), float(u.max()))
        after[sel] = curve.at(u)
    cum: FloatArray = demand.cumulative_with_group(before[r_idx], after, p_gw)[pm]
    return cum


def storeroom_demand(
    session: Session,
    storeroom_id: int,
    *,
    last_relamps: LastRelamps,
    options: Options | None = None,
    at: datetime | None = None,
    loaded: Portfolio | None = None,
) -> StoreDemand:
    """Weekly demand per lamp type over the horizon for every site the storeroom serves.

    loaded: a portfolio load shared with other answers (its moment is then the as-of).
    """
    get_storeroom(session, storeroom_id)
    opt = options or Options.of()
    at = loaded.at if loaded is not None else (at or utcnow())
    sites = site_ids_of(session, [storeroom_id])[storeroom_id]
    parts: list[tuple[IntArray, FloatArray, NDArray[np.bool_]]] = []
    groups: dict[int, IntArray] = {}
    nodes: dict[int, demand.NodeDemand] = {}
    for sid in sites:
        site = session.get(Site, sid)
        if site is None or site.retired_at is not None:
            continue
        sc = position_cumulative(session, site, at, opt.weeks, last_relamps, loaded=loaded)
        parts.append((sc.lamp_type_id, sc.cum, sc.dark))
        for t, site_nd in sc.nodes.items():  # one lamp type's scale error spans the sites
            nodes[t] = nodes[t].merge(site_nd) if t in nodes else site_nd
        for t, arr in sc.group_by_type.items():
            groups[t] = groups.get(t, np.zeros(opt.weeks, dtype=np.int64)) + arr
    lt_all = np.concatenate([p[0] for p in parts]) if parts else np.zeros(0, dtype=np.int64)
    cum_all = np.concatenate([p[1] for p in parts]) if parts else np.zeros((0, opt.weeks + 1))
    dark_all = np.concatenate([p[2] for p in parts]) if parts else np.zeros(0, dtype=bool)
    out: dict[int, TypeDemand] = {}
    for t in sorted(set(lt_all.tolist()) | set(groups)):
        sel = lt_all == t
        cum = cum_all[sel]
        n_dark = int(dark_all[sel].sum())
        grp = groups.get(t, np.zeros(opt.weeks, dtype=np.int64))
        nd = nodes.get(int(t))
        week = demand.week_demand(
            demand.weekly_increments(cum), grp, opt.level, opt.breakage, dark_now=n_dark, spread=nd
        )
        out[int(t)] = TypeDemand(int(t), int(sel.sum()), n_dark, cum, week, nd)
    start = at.date()
    return StoreDemand(
        storeroom_id=storeroom_id,
        as_of=at,
        week_starts=[start + timedelta(weeks=i) for i in range(opt.weeks)],
        options=opt,
        types=out,
    )


@dataclass(frozen=True)
class ToOrder:
    """The reorder figures of one stocked lamp type."""

    balance: StockBalance
    code: str
    unit_cost: float
    lead_weeks: int
    lead_time_mean: float
    annual_demand: float
    next_group_week: int | None
    decision: reorder.Reorder
    total_mean: FloatArray
    total_var: FloatArray


def to_order(sd: StoreDemand, balances: list[StockBalance], session: Session) -> list[ToOrder]:
    """Reorder point and order quantity of every stocked lamp type of the storeroom."""
    opt = sd.options
    codes = {
        int(i): (str(c), float(p))
        for i, c, p in session.execute(
            select(LampType.id, LampType.code, LampType.unit_price).where(
                LampType.id.in_([b.lamp_type_id for b in balances])
            )
        ).all()
    }
    out: list[ToOrder] = []
    for bal in balances:
        code, price = codes.get(bal.lamp_type_id, (str(bal.lamp_type_id), 0.0))
        unit_cost = price if bal.unit_cost is None else bal.unit_cost
        td = sd.types.get(bal.lamp_type_id)
        lead = min(max(math.ceil(bal.lead_time_weeks - 1e-9), 0), opt.weeks)
        if td is None:
            zeros = np.zeros(opt.weeks)
            mean_l = q_l = 0.0
            annual, next_group, total, var = 0.0, None, zeros, zeros
        else:
            # Spot over the lead time: one Bernoulli per position (clipped expected count).
            p_lead = np.clip(td.cum[:, lead] - td.cum[:, 0], 0.0, 1.0)
            if td.nodes is not None:  # mixed over the scale, as the weekly demand is
                q_spot = demand.lead_quantile(td.nodes, lead, opt.level)
                spot_l = demand.lead_mean(td.nodes, lead)
            else:
                q_spot = demand.quantile(p_lead, opt.level)[0] if lead else 0
                spot_l = float(p_lead.sum())
            group_l = float(td.week.group[:lead].sum())
            dark = td.dark_now if lead else 0
            brk = opt.breakage * (spot_l + dark + group_l)
            mean_l = spot_l + dark + group_l + brk
            q_l = q_spot + dark + group_l + brk
            total = td.week.total_mean
            var = td.week.spot_var
            annual = float(total.sum()) * reorder.WEEKS_PER_YEAR / opt.weeks
            nz = np.nonzero(td.week.group)[0]
            next_group = int(nz[0]) if nz.size else None
        cover = float(total[: next_group + 1].sum()) if next_group is not None else None
        decision = reorder.decide(
            available=bal.available,
            reorder_point=math.ceil(q_l - 1e-9),
            pack_size=bal.pack_size,
            policy=bal.policy,
            annual_demand=annual,
            order_cost=bal.order_cost,
            holding_cost_per_year=bal.holding_rate_per_year * unit_cost,
            lead_time_mean=mean_l,
            cover_need=cover,
        )
        out.append(
            ToOrder(bal, code, unit_cost, lead, mean_l, annual, next_group, decision, total, var)
        )
    return out


def level_outlook(sd: StoreDemand, row: ToOrder) -> outlook.Level:
    """The week-by-week level of one stocked type, the suggested order arriving after lead."""
    return outlook.project(
        row.balance.available,
        row.total_mean,
        row.total_var,
        sd.options.level,
        row.decision.order_quantity,
        arrives_week=row.lead_weeks + 1 if row.decision.order_quantity else None,
    )
