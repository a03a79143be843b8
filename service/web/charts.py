"""Chart data for the pages, from the planning and forecasting services (drawn by uPlot).

Each chart is a plain dict the page embeds as JSON: axis labels with units, one entry per
series (label, dash pattern so the lines stay apart in grey and on paper) and uPlot's
column data ([x values, series 1 values, ...]; None where a series has no point).
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass
from datetime import date, datetime
from typing import Any

import numpy as np
from numpy.typing import NDArray
from sqlalchemy import select
from sqlalchemy.orm import Session

from service.api.errors import NotFound
from service.catalogue.models import LampType
from service.catalogue.resolved import CurveInUse, TypeTable, catalogue_models
from service.forecasting.fit import FieldFit, fit_field, load_fitted_types
from service.forecasting.whatif import CurveResult, lamp_curve
from service.planning.service import AreaPlan, TypeGroup
from service.readings.ages import PositionAges, position_ages
from service.reliability.fleet import evaluate_fleet
from service.reliability.weibull import Weibull
from service.stock.demand import weekly_cumulative_totals
from service.stock.forecast import unique_rows

FloatArray = NDArray[np.float64]
Chart = dict[str, Any]
CURVE_POINTS = 121  # points per survival / light curve
COST_POINTS = 240  # at most this many points of the cost-rate curve
WEEKS = 26  # the overview's forecast window, weeks
# Dash patterns (px on, px off) for series 1, 2, 3...: lines differ without colour.
DASHES: list[list[int]] = [[], [10, 6], [3, 4], [14, 4, 3, 4], [6, 3]]


@dataclass(frozen=True)
class Series:
    """One plotted series."""

    label: str
    values: Sequence[float | None]
    points_only: bool = False  # markers without a line (optima, events)
    stepped: bool = False  # a step function (Kaplan-Meier)


def _num(v: float) -> float | None:
    """A JSON-safe number (NaN and infinities become gaps), rounded to 6 significant digits."""
    f = float(v)
    return float(f"{f:.6g}") if math.isfinite(f) else None


def chart(
    chart_id: str,
    title: str,
    x_label: str,
    y_label: str,
    x: Sequence[float],
    series: list[Series],
    y_range: tuple[float, float] | None = None,
) -> Chart:
    """A chart spec: axes with units, series with dash patterns, column data."""
    return {
        "id": chart_id,
        "y_range": list(y_range) if y_range else None,
        "title": title,
        "x_label": x_label,
        "y_label": y_label,
        "series": [
            {
                "label": s.label,
                "dash": DASHES[i % len(DASHES)],
                "points_only": s.points_only,
                "stepped": s.stepped,
            }
            for i, s in enumerate(series)
        ],
        "data": [[_num(v) for v in x]]
        + [[None if v is None else _num(v) for v in s.values] for s in series],
    }


def _curves(session: Session, g: TypeGroup) -> tuple[CurveResult, CurveResult]:
    """(catalogue curve at rated volts and cycle, curve at the area's volts and cycle)."""
    catalogue = lamp_curve(
        session,
        g.lamp_type_id,
        voltage_v=None,
        hours_per_start=None,
        t_max_h=None,
        points=CURVE_POINTS,
        field_fit=False,
    )
    here = lamp_curve(
        session,
        g.lamp_type_id,
        voltage_v=g.voltage_v,
        hours_per_start=g.hours_per_start,
        t_max_h=float(catalogue.t_h[-1]),  # the same grid, so the curves line up
        points=CURVE_POINTS,
        field_fit=True,
    )
    return catalogue, here


def _conditions(g: TypeGroup) -> str:
    cycle = "rated cycle" if g.hours_per_start is None else f"{g.hours_per_start:.3g} h per start"
    return f"{g.voltage_v:.0f} V, {cycle}"


def survival_chart(g: TypeGroup, code: str, cat: CurveResult, here: CurveResult) -> Chart:
    """S(t) at the area's voltage and switching next to the catalogue curve."""
    return chart(
        f"survival-{g.lamp_type_id}",
        f"{code}: lamps still burning",
        "Burn hours since the lamp went in (h)",
        "Share still burning S(t) (0 to 1)",
        here.t_h.tolist(),
        [
            Series(f"Here ({_conditions(g)}, {here.curve.method} curve)", here.survival.tolist()),
            Series("Catalogue (rated volts and cycle)", cat.survival.tolist()),
        ],
        y_range=(0.0, 1.0),
    )


def light_chart(
    g: TypeGroup, code: str, cat: CurveResult, here: CurveResult, floor: float | None
) -> Chart:
    """Lumen fraction over burn hours here and by the catalogue, against the area's floor."""
    series = [
        Series(f"Light output here ({_conditions(g)})", here.lumen_fraction.tolist()),
        Series("Catalogue light output", cat.lumen_fraction.tolist()),
    ]
    if floor is not None:
        series.append(Series(f"Light floor {floor:.0%}", [floor] * here.t_h.size))
    return chart(
        f"light-{g.lamp_type_id}",
        f"{code}: light output of a burning lamp",
        "Burn hours since the lamp went in (h)",
        "Light output (fraction of initial)",
        here.t_h.tolist(),
        series,
    )


def cost_chart(g: TypeGroup, code: str, currency: str) -> Chart:
    """The group cost rate C(T) per position, the spot-only line and the chosen interval."""
    plan = g.group.plan
    t = np.asarray(plan.grid_t, dtype=float)
    c = np.asarray(plan.grid_cost, dtype=float)
    keep = np.isfinite(c) & (t > 0)
    t, c = t[keep], c[keep]
    if t.size > COST_POINTS:
        idx = np.unique(np.linspace(0, t.size - 1, COST_POINTS).round().astype(int))
        t, c = t[idx], c[idx]
    chosen: list[float | None] = [None] * t.size
    if plan.interval_h is not None:  # put the chosen interval on the grid as its own point
        at = int(np.searchsorted(t, plan.interval_h))
        t = np.insert(t, at, plan.interval_h)
        c = np.insert(c, at, plan.cost_rate)
        chosen = [None] * t.size
        chosen[at] = plan.cost_rate * 1000.0
    per_kh = (c * 1000.0).tolist()  # per 1,000 burn hours reads better than per hour
    label = plan.binding.replace("_", " ")
    return chart(
        f"cost-{g.lamp_type_id}",
        f"{code}: cost of group relamping at interval T",
        "Group interval T (burn hours)",
        f"{currency} per position per 1,000 burn h",
        t.tolist(),
        [
            Series("Group and spot cost rate C(T)", per_kh),
            Series("Spot replacement only", [plan.spot_only_rate * 1000.0] * t.size),
            Series(f"Chosen interval ({label})", chosen, points_only=True),
        ],
    )


def type_codes(session: Session, ids: Sequence[int]) -> dict[int, str]:
    """Lamp type codes by id."""
    if not ids:
        return {}
    rows = session.execute(select(LampType.id, LampType.code).where(LampType.id.in_(list(ids))))
    return {int(i): str(c) for i, c in rows}


def area_charts(session: Session, plan: AreaPlan) -> list[list[Chart]]:
    """Per lamp type of the area: survival, light and cost charts."""
    codes = type_codes(session, [g.lamp_type_id for g in plan.groups])
    out = []
    for g in plan.groups:
        code = codes.get(g.lamp_type_id, str(g.lamp_type_id))
        cat, here = _curves(session, g)
        out.append(
            [
                survival_chart(g, code, cat, here),
                light_chart(g, code, cat, here, plan.area.light_floor),
                cost_chart(g, code, plan.site.currency),
            ]
        )
    return out


def weekly_burnouts(
    session: Session,
    at: datetime,
    due: Sequence[date],
    today: date,
    weeks: int = WEEKS,
    *,
    loaded: tuple[PositionAges, TypeTable] | None = None,
) -> Chart | None:
    """Expected burnouts per week for the next weeks by lamp type, group relamps marked.

    Cumulative expected spot replacements N_a(w) (the delayed-renewal sum of
    service.forecasting.spot_replacements, every week boundary at once and summed per lamp
    type by stock.demand.weekly_cumulative_totals) at the end of each week, differenced
    into weekly counts; `due` are the planned group relamp dates.
    loaded: the active positions' ages and their type table, when the caller has them
    (the overview's plans load the same ones); else they are loaded here.
    """
    if loaded is None:
        ages = position_ages(session, at=at, active_only=True)
        types = load_fitted_types(session, ages.lamp_type_id, ballast_kinds=ages.ballast_kind)
    else:
        ages, types = loaded
    if ages.size == 0:
        return None
    k = types.index(ages.lamp_type_id, ages.ballast_kind)
    age = np.where(ages.burned_out, 0.0, ages.age_h)  # dark: a new lamp goes in now
    # The effective Weibull scale of each position at its voltage and switching.
    scale_h = evaluate_fleet(types.table, k, age, ages.voltage_v, ages.hours_per_start, 0.0).scale_h
    # Positions alike in type, scale (4 significant digits), age (whole hours) and weekly
    # burn hours share one renewal evaluation: a 100,000-fixture portfolio has a few
    # thousand such groups, and the rounding moves each expected count by under 0.1%.
    mag = 10.0 ** (np.floor(np.log10(np.maximum(scale_h, 1.0))) - 3)
    keys = np.column_stack(
        [ages.lamp_type_id, k, np.round(scale_h / mag) * mag, np.round(age), ages.burn_h_per_week]
    )
    groups, member = unique_rows(keys)
    weight = np.bincount(member, minlength=len(groups)).astype(float)
    g_type, g_k = groups[:, 0].astype(np.int64), groups[:, 1].astype(np.int64)
    type_ids, per_type = np.unique(g_type, return_inverse=True)
    # Every week boundary summed per lamp type (stock.demand.weekly_cumulative_totals: the
    # groups' dF_a added up per lamp-type row and cell width, one convolution per class).
    cumulative = weekly_cumulative_totals(
        types.table.shape,
        g_k,
        groups[:, 2],
        groups[:, 3],
        groups[:, 4],
        weeks,
        weight=weight,
        label=per_type.ravel().astype(np.int64),
        labels=type_ids.size,
    ).T  # (weeks + 1) x lamp types
    per_week = np.diff(cumulative, axis=0)  # weeks x lamp types
    codes = type_codes(session, type_ids.tolist())
    series = [
        Series(f"{codes.get(int(t), str(t))} burnouts", per_week[:, j].tolist())
        for j, t in enumerate(type_ids.tolist())
    ]
    marks = [0] * weeks
    for d in due:
        w = (d - today).days // 7
        if 0 <= w < weeks:
            marks[w] += 1
    series.append(
        Series(
            "Group relamps due (areas)",
            [m if m else None for m in marks],
            points_only=True,
        )
    )
    return chart(
        "weekly-burnouts",
        f"Expected burnouts per week, next {weeks} weeks",
        "Week from today (1 = this week)",
        "Expected burnouts per week (lamps); relamps due (areas)",
        list(range(1, weeks + 1)),
        series,
    )


@dataclass(frozen=True)
class FieldFitView:
    """A lamp type's field fit for its page: the fit, the curve forecasts use, the chart."""

    fit: FieldFit
    code: str
    chart: Chart | None
    failures: int
    censored: int


def field_fit_view(session: Session, lamp_type_id: int) -> FieldFitView:
    """Kaplan-Meier steps with their 95 % band beside the fitted and catalogue Weibulls."""
    models = catalogue_models(session, [lamp_type_id])
    if lamp_type_id not in models:
        raise NotFound(f"lamp type {lamp_type_id} does not exist.", resource="lamp type")
    model = models[lamp_type_id]
    ff = fit_field(session, model, lamp_type_id)
    code = type_codes(session, [lamp_type_id]).get(lamp_type_id, str(lamp_type_id))
    km = ff.kaplan_meier
    catalogue = Weibull(model.shape, model.scale_h)
    t_end = 2.0 * catalogue.scale
    if km is not None and km.t.size:
        t_end = max(t_end, float(km.t.max()) * 1.1)
    grid = np.linspace(0.0, t_end, CURVE_POINTS)
    t = np.unique(np.concatenate((grid, km.t if km is not None else np.zeros(0))))
    series = [Series("Catalogue Weibull", catalogue.sf(t).tolist())]
    if ff.mle is not None:
        fitted = Weibull(ff.mle.shape, ff.mle.scale)
        series.append(Series("Fitted Weibull (field MLE)", fitted.sf(t).tolist()))
    if km is not None and km.t.size:
        # Kaplan-Meier is a right-continuous step function: the value of the last step at
        # or before each t (1 before the first event time).
        at = np.searchsorted(km.t, t, side="right") - 1
        for label, values in (
            ("Kaplan-Meier (field records)", km.survival),
            ("Kaplan-Meier 95% lower", km.lower),
            ("Kaplan-Meier 95% upper", km.upper),
        ):
            stepped = np.where(at >= 0, values[np.maximum(at, 0)], 1.0)
            series.append(Series(label, stepped.tolist(), stepped=True))
    return FieldFitView(
        fit=ff,
        code=code,
        failures=int(ff.data.failed.sum()),
        censored=int((~ff.data.failed).sum()),
        chart=chart(
            f"field-fit-{lamp_type_id}",
            f"{code}: field survival against the curves",
            "Burn hours at rated conditions (h)",
            "Share still burning S(t) (0 to 1)",
            t.tolist(),
            series,
            y_range=(0.0, 1.0),
        ),
    )


def curves_in_use(session: Session, lamp_type_ids: Sequence[int]) -> dict[int, CurveInUse]:
    """The life curve forecasts use per lamp type (catalogue or field fit, and why)."""
    if not lamp_type_ids:
        return {}
    types = load_fitted_types(session, list(lamp_type_ids))
    return {int(i): c for i, c in zip(types.ids.tolist(), types.curves, strict=True)}
