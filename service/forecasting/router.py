"""HTTP routes for forecasts, what-if curves and field fits."""

from __future__ import annotations

import math
from datetime import UTC, datetime
from typing import Annotated, Any

from fastapi import APIRouter, Query

from service.api.auth import ReadKey, SessionDep
from service.api.errors import NotFound
from service.api.ids import MAX_ID, IdPath
from service.api.resource_routes import endpoint, param
from service.api.times import Timestamp
from service.catalogue.models import LampType
from service.catalogue.resolved import CurveInUse, catalogue_models
from service.db.crud import get_or_404
from service.forecasting import service as fc
from service.forecasting.fit import fit_field, load_fitted_types
from service.forecasting.schemas import (
    AreaForecastRead,
    CurveInUseRead,
    CurveRead,
    FieldFitRead,
    ForecastRead,
    KaplanMeierPoint,
    PositionForecastRead,
    SummaryRead,
    WeibullFitRead,
)
from service.forecasting.whatif import lamp_curve
from service.register.models import Area, Fixture, Site
from service.reliability.fitting import WeibullFit

router = APIRouter(tags=["forecasts"])

# At least 0.001 week (about 10 minutes): a denormal horizon such as 1e-308 weeks made the
# renewal estimate NaN, shown as null where the schema promises a number.
Horizon = Annotated[
    float,
    Query(ge=0.001, le=520, description="Horizon in weeks (burn hours from each area's rate)."),
]
At = Annotated[Timestamp | None, Query(description="Moment to forecast from (default now).")]
METHOD = (
    "Survival S(age) per lamp; P(fail within horizon) = 1 - S(age+w)/S(age); expected "
    "burnouts with spot replacement by per-position delayed renewal from the current age; "
    "lumen fraction = maintained light: lamp lumen depreciation x luminaire dirt factor "
    "(CIE 97:2005 luminaire maintenance factor by the area's luminaire type, environment and "
    "time since cleaning) x voltage light factor; dark positions count "
    "as new lamps going in now. Light floor date: mean lumen fraction (burnouts replaced) "
    "falls below the floor; burnout ceiling date: share of current lamps burned out (none "
    "replaced) reaches the ceiling. Dates in the site's time zone. burnouts_low/high: "
    "central 90 % range of expected_failures_no_replacement (lamps now burning that burn "
    "out within the horizon): quantiles of the count's mixture over each lamp type's "
    "uncertain life curve (scale lognormal from the curve's bounds, or the catalogue prior "
    "ln 1.5/1.645; shape only where the field shape is used as it is; correlation 0): "
    "Gauss-Hermite nodes, mixture CDF on a fine grid, Poisson-binomial exact or "
    "refined-normal at each point, lamp types independent (forecasting/ranges.py)."
)


def _curve(type_id: int, c: CurveInUse) -> CurveInUseRead:
    return CurveInUseRead(
        lamp_type_id=type_id,
        method=c.method,
        shape=c.shape,
        scale_h=c.scale_h,
        reason=c.reason,
        weight=c.weight,
        scale_bounds_h=c.scale_bounds_h,
        confidence=c.confidence,
    )


def _summary(s: fc.Summary) -> SummaryRead:
    return SummaryRead(**s.__dict__)


def _read(f: fc.Forecast, scope: str, scope_id: int, with_positions: bool) -> ForecastRead:
    positions = None
    if with_positions:
        p, a, r = f.positions, f.positions.ages, f.positions.fleet
        positions = [
            PositionForecastRead(
                **a.row(i),
                life_factor=float(r.life_factor[i]),
                scale_h=float(r.scale_h[i]),
                survival=float(p.survival[i]),
                p_fail_horizon=float(p.p_fail[i]),
                expected_burnouts_spot=float(p.expected_burnouts[i]),
                lumen_fraction=float(p.lumen_now[i]),
                lumen_fraction_end=float(p.lumen_end[i]),
                warn_voltage=bool(r.warn_voltage[i]),
            )
            for i in range(a.size)
        ]
    return ForecastRead(
        scope=scope,
        scope_id=scope_id,
        at=f.at,
        time_zone=f.time_zone,
        horizon_weeks=f.horizon_weeks,
        summary=_summary(f.summary),
        areas=[
            AreaForecastRead(
                area_id=x.area_id,
                name=x.name,
                burn_h_per_week=x.burn_h_per_week,
                light_floor=x.light_floor,
                burnout_ceiling=x.burnout_ceiling,
                light_floor_date=x.light_floor_date,
                burnout_ceiling_date=x.burnout_ceiling_date,
                summary=_summary(x.summary),
            )
            for x in f.areas
        ],
        curves=[_curve(k, c) for k, c in sorted(f.curves.items())],
        positions=positions,
        method=METHOD,
    )


def _at(at: datetime | None) -> datetime | None:
    return at.replace(tzinfo=UTC) if at is not None and at.tzinfo is None else at


def _forecast_route(
    scope: str, model: type[Any], doc: str, show: bool, extra: dict[str, Any]
) -> None:
    """GET /forecasts/<scope>s/{<scope>_id}: one scope's forecast (404 when it is missing).

    `show` says whether positions are listed; `extra` adds query parameters (name to
    (annotation, default)), passed on to the forecast except `positions`, which overrides show.
    """
    id_name = f"{scope}_id"
    params = [
        param(id_name, IdPath),
        param("session", SessionDep),
        param("_", ReadKey),
        param("horizon_weeks", Horizon, 13.0),
        param("at", At, None),
        *(param(name, ann, default) for name, (ann, default) in extra.items()),
    ]

    def run(session: Any, _: Any, horizon_weeks: float, at: Any, **values: Any) -> ForecastRead:
        obj_id = values.pop(id_name)
        get_or_404(session, model, obj_id, scope.replace("_", " "))
        with_positions = values.pop("positions", show)
        f = fc.forecast(
            session, **{id_name: obj_id}, **values, horizon_weeks=horizon_weeks, at=_at(at)
        )
        return _read(f, scope, obj_id, with_positions)

    path = f"/forecasts/{scope.replace('_', '-')}s/{{{id_name}}}"
    router.add_api_route(
        path,
        endpoint(f"forecast_{scope}", doc, params, run),
        methods=["GET"],
        response_model=ForecastRead,
    )


_forecast_route(
    "site", Site, "Forecast a whole site, with each area's totals and crossing dates.", False, {}
)
_forecast_route(
    "area",
    Area,
    "Forecast one area: totals, light floor and burnout ceiling dates.",
    False,
    {"positions": (Annotated[bool, Query(description="Include every position.")], False)},
)
_forecast_route("fixture", Fixture, "Forecast one fixture, position by position.", True, {})
_forecast_route(
    "lamp_type",
    LampType,
    "Forecast every position holding a lamp type (optionally in one site).",
    False,
    {
        "site_id": (
            Annotated[int | None, Query(ge=1, le=MAX_ID, description="Only this site.")],
            None,
        )
    },
)


@router.get("/forecasts/curve", response_model=CurveRead)
def what_if_curve(
    session: SessionDep,
    _: ReadKey,
    lamp_type_id: Annotated[int, Query(ge=1, le=MAX_ID, description="The lamp type.")],
    # Lower bounds keep the power laws and the renewal grid finite (a 1e-300 V circuit or
    # a 1e-50 h grid overflows them); none of them cuts off a real lamp or circuit.
    voltage_v: Annotated[float | None, Query(ge=1, le=1000, description="Volts.")] = None,
    hours_per_start: Annotated[
        float | None, Query(ge=0.01, le=10_000, description="Burn hours per start.")
    ] = None,
    t_max_h: Annotated[
        float | None, Query(ge=1, le=1_000_000, description="Grid end, burn hours.")
    ] = None,
    points: Annotated[int, Query(ge=2, le=2001)] = 101,
    field_fit: Annotated[bool, Query(description="Use the field fit's curve.")] = True,
) -> CurveRead:
    """What-if: S(t), lumen fraction and M(t) for a lamp type at a voltage and cycle."""
    r = lamp_curve(
        session,
        lamp_type_id,
        voltage_v=voltage_v,
        hours_per_start=hours_per_start,
        t_max_h=t_max_h,
        points=points,
        field_fit=field_fit,
    )
    model_v = voltage_v
    if model_v is None:
        model_v = catalogue_models(session, [lamp_type_id])[lamp_type_id].rated_volts
    return CurveRead(
        lamp_type_id=lamp_type_id,
        voltage_v=model_v,
        hours_per_start=hours_per_start,
        life_factor=r.life_factor,
        light_factor=r.light_factor,
        power_factor=r.power_factor,
        shape=r.shape,
        scale_h=r.scale_h,
        warn_voltage=r.warn_voltage,
        warn_switching=r.warn_switching,
        curve=_curve(lamp_type_id, r.curve),
        t_h=r.t_h.tolist(),
        survival=r.survival.tolist(),
        lumen_fraction=r.lumen_fraction.tolist(),
        renewal_m=r.renewal_m.tolist(),
    )


def _fit(w: WeibullFit | None) -> WeibullFitRead | None:
    if w is None:
        return None
    hi = w.scale_bounds[1]
    return WeibullFitRead(
        method=w.method,
        shape=w.shape,
        scale_h=w.scale,
        shape_bounds=w.shape_bounds,
        scale_bounds=(w.scale_bounds[0], None if math.isinf(hi) else hi),
        confidence=w.confidence,
        log_likelihood=w.log_likelihood,
    )


@router.get("/field-fits/lamp-types/{lamp_type_id}", response_model=FieldFitRead)
def field_fit(
    lamp_type_id: IdPath,
    session: SessionDep,
    _: ReadKey,
    site_id: Annotated[
        int | None, Query(ge=1, le=MAX_ID, description="Only this site's records.")
    ] = None,
) -> FieldFitRead:
    """Field fit of a lamp type: Weibull MLE and WeiBayes with bounds, Kaplan-Meier, choice."""
    models = catalogue_models(session, [lamp_type_id])
    if lamp_type_id not in models:
        raise NotFound(f"lamp type {lamp_type_id} does not exist.", resource="lamp type")
    if site_id is not None:
        get_or_404(session, Site, site_id, "site")
    model = models[lamp_type_id]
    ff = fit_field(session, model, lamp_type_id, site_id)
    km = ff.kaplan_meier
    points = (
        [
            KaplanMeierPoint(
                t_h=float(km.t[i]),
                survival=float(km.survival[i]),
                lower=float(km.lower[i]),
                upper=float(km.upper[i]),
                at_risk=int(km.at_risk[i]),
                events=int(km.events[i]),
            )
            for i in range(km.t.size)
        ]
        if km is not None
        else []
    )
    in_use = load_fitted_types(session, [lamp_type_id], field_fit=True).curves[0]
    return FieldFitRead(
        lamp_type_id=lamp_type_id,
        site_id=site_id,
        n_failures=int(ff.data.failed.sum()),
        n_censored=int((~ff.data.failed).sum()),
        n_removed=ff.data.n_removed,
        n_in_service=ff.data.n_in_service,
        catalogue_shape=model.shape,
        catalogue_scale_h=model.scale_h,
        mle=_fit(ff.mle),
        mle_error=ff.mle_error,
        weibayes=_fit(ff.weibayes),
        kaplan_meier=points,
        choice=_curve(lamp_type_id, ff.curve),
        forecasts_use=_curve(lamp_type_id, in_use),
    )
