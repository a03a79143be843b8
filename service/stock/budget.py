"""The 12-month budget per site and for the portfolio: what relamping and running will cost.

Per site, month by month from today (month 1 runs from today to the end of this month):

- group: each planned group relamp (planning: due date, then again every interval at the
  area's burn rate) costs its lamps, labour (group minutes per lamp), one equipment hire
  per area visit, disposal (mercury lamps) and cleaning (minutes per lamp, an input);
- spot: expected spot replacements (stock.forecast: per-position delayed renewal, new
  lamps after a group relamp; dark lamps now in month 1) at the lamp price, spot labour,
  equipment hire per spot visit and disposal, as planning.group_plan.CostInputs prices them;
- operation: energy, lamp watts at the operating voltage x burn hours x tariff;
- retrofit: none until retrofit options are priced (lamp choice is not built yet).

Amounts are in the site's currency; with a reporting currency and user-set rates (one
unit of the site currency in the reporting one) each row also carries the converted sum.
"""

from __future__ import annotations

from collections import defaultdict
from dataclasses import dataclass
from datetime import date, datetime, timedelta

import numpy as np
from numpy.typing import NDArray
from sqlalchemy import select
from sqlalchemy.orm import Session

from service.api.errors import Invalid
from service.db.base import utcnow
from service.planning.group_plan import CostInputs
from service.planning.service import LastRelamps, local_today
from service.register.models import Site
from service.stock.forecast import Portfolio, SiteCurves, load_portfolio, position_cumulative

MONTHS = 12
WEEKS = 54  # weeks of spot curves: enough to reach the end of the twelfth month
CATEGORIES = ("lamps", "labour", "hire", "disposal", "cleaning", "energy")
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
) -> None:
    """Add the spot split: weekly expected replacements per (area, lamp type) by week start,
    priced as spot_cost prices them (every group and month in one array step)."""
    inc = np.diff(sc.cum, axis=1)
    pairs, per_week = _spot_per_group(sc.area_id, sc.lamp_type_id, inc, sc.dark)
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
    starts = month_starts(today)
    sums: dict[tuple[int, str, str], float] = defaultdict(float)
    sc = position_cumulative(session, site, at, WEEKS, last_relamps, loaded=loaded)
    costs = {(p.area.id, g.lamp_type_id): (p, g) for p in sc.plans for g in p.groups}
    visits: set[tuple[int, date]] = set()
    days_in_month = [(starts[i + 1] - starts[i]).days for i in range(MONTHS)]
    for plan in sc.plans:
        for g in plan.groups:
            c = g.costs
            for i, days in enumerate(days_in_month):  # energy: watts x hours x tariff
                hours = plan.weekly_burn_hours * days / 7.0
                kwh = g.positions * c.lamp_watts * g.group.power_factor * hours / 1000.0
                sums[(i, "operation", "energy")] += kwh * c.energy_price_per_kwh
            interval = g.group.plan.interval_h
            if g.due_on is None or interval is None or plan.weekly_burn_hours <= 0:
                continue
            step = timedelta(days=interval / plan.weekly_burn_hours * 7.0)
            day = g.due_on
            while (mi := month_of(day, starts)) is not None:
                first_visit = (plan.area.id, day) not in visits  # one hire per area visit
                visits.add((plan.area.id, day))
                priced = group_cost(
                    c,
                    g.positions,
                    hire=first_visit,
                    cleaning_minutes_per_lamp=cleaning_minutes_per_lamp,
                )
                for cat, amount in priced.items():
                    sums[(mi, "group", cat)] += amount
                if step.days < 1:
                    break
                day = day + step
    _spot_rows(sc, {k: v[1].costs for k, v in costs.items()}, at, starts, sums)
    rows: list[Row] = []
    for i in range(MONTHS):
        label = starts[i].strftime("%Y-%m")
        for split in SPLITS:
            for cat in CATEGORIES:
                amount = sums.get((i, split, cat), 0.0)
                if split == "operation" and cat != "energy":
                    continue
                if split != "operation" and cat == "energy":
                    continue
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
