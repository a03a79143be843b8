"""The 12-month budget per site and for the portfolio: what relamping and running will cost.

Per site, month by month from today (month 1 runs from today to the end of this month):

- group: each planned group relamp (planning: due date, then again every interval at the
  area's burn rate) costs its lamps, labour (group minutes per lamp), one equipment hire
  per area visit, disposal (mercury lamps) and cleaning (minutes per lamp, an input);
- spot: expected spot replacements (stock.forecast: per-position delayed renewal, new
  lamps after a group relamp; dark lamps now in month 1) at the lamp price, spot labour,
  equipment hire per spot visit and disposal, as planning.group_plan.CostInputs prices them;
- operation: energy, lamp watts at the operating voltage x burn hours x tariff;
- retrofit: where an area's lamp choice picks a retrofit option (planning.choice), its kit,
  labour, hire, the removed lamps' disposal, cleaning and rebate (negative) at the relamp
  that fits it; energy from then on at the option's watts (stock.retrofit_budget).

Amounts are in the site's currency; with a reporting currency and user-set rates (one
unit of the site currency in the reporting one) each row also carries the converted sum.
"""

from __future__ import annotations

from collections import defaultdict
from dataclasses import dataclass, field
from datetime import date, datetime, timedelta

import numpy as np
from numpy.typing import NDArray
from sqlalchemy import select
from sqlalchemy.orm import Session

from service.api.errors import Invalid
from service.db.base import utcnow
from service.planning.group_plan import CostInputs
from service.planning.service import AreaPlan, LastRelamps, TypeGroup, local_today
from service.register.models import Site
from service.stock.forecast import Portfolio, SiteCurves, load_portfolio, position_cumulative
from service.stock.retrofit_budget import (
    Retrofit,
    chosen_retrofits,
    energy_split_days,
    first_week_after,
    option_spot_lamps,
)

MONTHS = 12
WEEKS = 54  # weeks of spot curves: enough to reach the end of the twelfth month
CATEGORIES = ("lamps", "labour", "hire", "disposal", "cleaning", "rebate", "energy")
SPLITS = ("group", "spot", "retrofit", "operation")


def month_starts(today: date, months: int = MONTHS) -> list[date]:
    """Start of each budget month (today, then the 1st of each following month) and the end."""
    out = [today]
    y, m = today.year, today.month
    for _ in range(months):
        m += 1
        if m == 13:
            y, m = y + 1, 1
        out.append(date(y, m, 1))
    return out


def month_of(day: date, starts: list[date]) -> int | None:
    """The budget month index of a day (None outside the twelve months)."""
    if day < starts[0] or day >= starts[-1]:
        return None
    for i in range(len(starts) - 1):
        if day < starts[i + 1]:
            return i
    return None


@dataclass(frozen=True)
class Row:
    """One budget amount."""

    site_id: int
    currency: str
    month: str  # YYYY-MM
    split: str
    category: str
    amount: float


def group_cost(
    c: CostInputs, lamps: float, *, hire: bool, cleaning_minutes_per_lamp: float = 0.0
) -> dict[str, float]:
    """A group relamp of `lamps` positions by category: lamps, labour, disposal, cleaning and,
    when this is the area's visit, one equipment hire."""
    return {
        "lamps": lamps * c.lamp_price,
        "labour": lamps * c.group_labour,
        "disposal": lamps * c.disposal_fee_per_lamp,
        "cleaning": lamps * cleaning_minutes_per_lamp / 60.0 * c.labour_rate_per_h,
        "hire": c.equipment_hire_per_visit if hire else 0.0,
    }


def spot_cost(c: CostInputs, lamps: float) -> dict[str, float]:
    """Spot replacement of `lamps` lamps by category (hire per spot visit, as planned)."""
    return {
        "lamps": lamps * c.lamp_price,
        "labour": lamps * c.spot_labour,
        "hire": lamps * c.spot_equipment,
        "disposal": lamps * c.disposal_fee_per_lamp,
    }


def _spot_per_group(
    area_id: NDArray[np.int64],
    lamp_type_id: NDArray[np.int64],
    inc: NDArray[np.float64],
    dark: NDArray[np.bool_],
) -> tuple[list[tuple[int, int]], NDArray[np.float64]]:
    """Weekly spot lamps per (area, lamp type), dark lamps in week one; one pass, no masks."""
    # One int64 key per pair (ids are below 2**31, service.api.ids), sorting as the pairs do.
    key = area_id.astype(np.int64) * 2**31 + lamp_type_id.astype(np.int64)
    uniq, inv = np.unique(key, return_inverse=True)
    inv = np.asarray(inv).ravel()
    sums_w = np.zeros((len(uniq), inc.shape[1]))
    if inv.size and inc.shape[1]:  # rows of each pair summed in order (np.add.at, faster)
        order = np.argsort(inv, kind="stable")
        first = np.searchsorted(inv[order], np.arange(len(uniq)))
        sums_w = np.add.reduceat(inc[order], first, axis=0)
    if inc.shape[1]:
        sums_w[:, 0] += np.bincount(inv, weights=dark.astype(float), minlength=len(uniq))
    pairs = [(int(k // 2**31), int(k % 2**31)) for k in uniq.tolist()]
    return pairs, sums_w


def _spot_rows(
    sc: SiteCurves,
    costs: dict[tuple[int, int], CostInputs],
    at: datetime,
    starts: list[date],
    sums: dict[tuple[int, str, str], float],
    cut: dict[tuple[int, int], int],
) -> None:
    """Add the spot split: weekly expected replacements per (area, lamp type) by week start,
    priced as spot_cost prices them (every group and month in one array step). cut: the
    week from which a pair's lamps are no longer there (a retrofit took them out)."""
    inc = np.diff(sc.cum, axis=1)
    pairs, per_week = _spot_per_group(sc.area_id, sc.lamp_type_id, inc, sc.dark)
    for i, pr in enumerate(pairs):
        if pr in cut:
            per_week[i, cut[pr] :] = 0.0
    week_month = [month_of(at.date() + timedelta(weeks=w), starts) for w in range(WEEKS)]
    to_month = np.zeros((WEEKS, MONTHS))  # which budget month each week falls in
    for w, wm in enumerate(week_month):
        if wm is not None:
            to_month[w, wm] = 1.0
    keep = [i for i, pr in enumerate(pairs) if pr in costs]
    if not keep:
        return
    lamps = per_week[keep] @ to_month  # groups x months: expected spot lamps
    cs = [costs[pairs[i]] for i in keep]
    unit = {  # per lamp, by category, as spot_cost prices one lamp
        cat: np.array([spot_cost(c, 1.0)[cat] for c in cs]) for cat in spot_cost(cs[0], 1.0)
    }
    for cat, price in unit.items():
        for m, amount in enumerate((price @ lamps).tolist()):
            sums[(m, "spot", cat)] += amount


@dataclass
class _Book:
    """What the booking steps of one site's budget share: months, sums and area visits."""

    starts: list[date]
    cleaning_minutes_per_lamp: float
    sums: dict[tuple[int, str, str], float] = field(default_factory=lambda: defaultdict(float))
    visits: set[tuple[int, date]] = field(default_factory=set)

    def add(self, month: int, split: str, priced: dict[str, float]) -> None:
        """Add amounts by category to one month and split."""
        for cat, amount in priced.items():
            self.sums[(month, split, cat)] += amount

    def visit(self, area_id: int, day: date) -> bool:
        """Record an area visit; True the first time (one equipment hire per visit)."""
        first = (area_id, day) not in self.visits
        self.visits.add((area_id, day))
        return first


def _group_visits(
    bk: _Book, plan: AreaPlan, c: CostInputs, lamps: int, first: date, interval: float | None
) -> None:
    """Group relamps from `first`, then every interval at the area's burn rate, in the year."""
    if interval is None or plan.weekly_burn_hours <= 0:
        return
    step = timedelta(days=interval / plan.weekly_burn_hours * 7.0)
    day = first
    while (mi := month_of(day, bk.starts)) is not None:
        priced = group_cost(
            c,
            lamps,
            hire=bk.visit(plan.area.id, day),
            cleaning_minutes_per_lamp=bk.cleaning_minutes_per_lamp,
        )
        bk.add(mi, "group", priced)
        if step.days < 1:
            break
        day = day + step


def _energy(bk: _Book, plan: AreaPlan, g: TypeGroup, rf: Retrofit | None) -> None:
    """Energy by month: watts x hours x tariff (the option's watts from a retrofit on)."""
    c = g.costs
    old_w = g.positions * c.lamp_watts * g.group.power_factor  # watts of the type's lamps
    new_w = rf.units * rf.result.watts_per_unit if rf is not None else old_w
    rate, price = plan.weekly_burn_hours, c.energy_price_per_kwh
    if rf is None:  # the old lamps all month, every month (the same sums as the split below)
        for i in range(MONTHS):
            hours = rate * (bk.starts[i + 1] - bk.starts[i]).days / 7.0
            bk.sums[(i, "operation", "energy")] += old_w * hours / 1000.0 * price
        return
    for i in range(MONTHS):
        before, after = energy_split_days(rf.day, bk.starts[i], bk.starts[i + 1])
        hours, hours_new = rate * before / 7.0, rate * after / 7.0
        kwh = old_w * hours / 1000.0 + (new_w * hours_new / 1000.0 if after else 0.0)
        bk.sums[(i, "operation", "energy")] += kwh * price


def _retrofit(bk: _Book, plan: AreaPlan, g: TypeGroup, rf: Retrofit) -> None:
    """The retrofit visit under "retrofit", then the option's group relamps and spot lamps."""
    opt = rf.result.option
    mi = month_of(rf.day, bk.starts)
    if mi is not None:
        priced = group_cost(opt.costs, rf.units, hire=bk.visit(plan.area.id, rf.day))
        priced["disposal"] += opt.removal_disposal  # the lamps taken out
        # Cleaning at the visit, per lamp position, as a group relamp's (the budget's input).
        priced["cleaning"] = (
            g.positions * bk.cleaning_minutes_per_lamp / 60.0 * g.costs.labour_rate_per_h
        )
        priced["rebate"] = -opt.rebate
        bk.add(mi, "retrofit", priced)
    interval = rf.result.plan.plan.interval_h
    if interval is not None and plan.weekly_burn_hours > 0:
        later = rf.day + timedelta(days=interval / plan.weekly_burn_hours * 7.0)
        _group_visits(bk, plan, opt.costs, rf.units, later, interval)
    lamps = option_spot_lamps(rf, bk.starts, plan.weekly_burn_hours)
    for i, n in enumerate(lamps.tolist()):
        bk.add(i, "spot", spot_cost(opt.costs, n))


def site_budget(
    session: Session,
    site: Site,
    *,
    last_relamps: LastRelamps,
    at: datetime | None = None,
    cleaning_minutes_per_lamp: float = 0.0,
    loaded: Portfolio | None = None,
) -> list[Row]:
    """A site's twelve months of relamping and energy costs, by split and category.

    loaded: a portfolio load shared with other answers (its moment is then `at`).
    """
    at = loaded.at if loaded is not None else (at or utcnow())
    today = local_today(site, at)
    bk = _Book(month_starts(today), cleaning_minutes_per_lamp)
    # The spot curves only: the mixture's nodes are the storeroom demand's, not the budget's.
    sc = position_cumulative(session, site, at, WEEKS, last_relamps, loaded=loaded, nodes=False)
    retro = chosen_retrofits(session, sc.plans)
    for plan in sc.plans:
        for g in plan.groups:
            rf = retro.get((plan.area.id, g.lamp_type_id))
            _energy(bk, plan, g, rf)
            if rf is None and g.due_on is not None:
                _group_visits(bk, plan, g.costs, g.positions, g.due_on, g.group.plan.interval_h)
            elif rf is not None:
                _retrofit(bk, plan, g, rf)
    costs = {(p.area.id, g.lamp_type_id): g.costs for p in sc.plans for g in p.groups}
    cut = {k: first_week_after(rf.day, at.date()) for k, rf in retro.items()}
    _spot_rows(sc, costs, at, bk.starts, bk.sums, cut)
    return _rows(site, bk)


def _rows(site: Site, bk: _Book) -> list[Row]:
    """Every month's amount by split and category (energy under operation only; the rebate
    under retrofit only), rounded to cents."""
    rows: list[Row] = []
    for i in range(MONTHS):
        label = bk.starts[i].strftime("%Y-%m")
        for split in SPLITS:
            for cat in CATEGORIES:
                if (split == "operation") != (cat == "energy"):
                    continue
                if cat == "rebate" and split != "retrofit":
                    continue
                amount = bk.sums.get((i, split, cat), 0.0)
                rows.append(Row(site.id, site.currency, label, split, cat, round(amount, 2)))
    return rows


def convert(
    rows: list[Row], reporting: str | None, rates: dict[str, float]
) -> list[dict[str, object]]:
    """Rows as dicts, each with its amount in the reporting currency when one is set."""
    out: list[dict[str, object]] = []
    if reporting is not None:
        missing = sorted({r.currency for r in rows if r.currency != reporting} - set(rates))
        if missing:
            raise Invalid(
                f"No exchange rate into {reporting} for {', '.join(missing)}.",
                errors=[{"field": "rates", "in": "body", "message": f"missing {missing[0]}"}],
            )
    for r in rows:
        d: dict[str, object] = dict(r.__dict__)
        if reporting is not None:
            rate = 1.0 if r.currency == reporting else rates[r.currency]
            d["reporting_currency"] = reporting
            d["reporting_amount"] = round(r.amount * rate, 2)
        out.append(d)
    return out


def portfolio(
    session: Session,
    *,
    last_relamps: LastRelamps,
    at: datetime | None = None,
    cleaning_minutes_per_lamp: float = 0.0,
    loaded: Portfolio | None = None,
) -> list[Row]:
    """Every active site's budget rows, site by site, from one load of the portfolio.

    loaded: a load shared with other answers (demand, the to-order list), else made here.
    """
    sites = session.scalars(select(Site).where(Site.retired_at.is_(None)).order_by(Site.id)).all()
    if loaded is None:
        loaded = load_portfolio(session, sites, at or utcnow(), last_relamps)
    rows: list[Row] = []
    for s in sites:
        rows += site_budget(
            session,
            s,
            last_relamps=last_relamps,
            cleaning_minutes_per_lamp=cleaning_minutes_per_lamp,
            loaded=loaded,
        )
    return rows


def totals(rows: list[dict[str, object]], key: str) -> dict[str, float]:
    """Sum of an amount column by month (for the portfolio in the reporting currency)."""
    out: dict[str, float] = defaultdict(float)
    for r in rows:
        out[str(r["month"])] += float(r[key])  # type: ignore[arg-type]
    return {k: round(v, 2) for k, v in sorted(out.items())}
