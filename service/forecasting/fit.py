"""Field fit per lamp type: removals and lamps in service as survival records.

Records, in rated-condition hours (wear accumulated over each lamp's supply history with
the catalogue model's voltage x switching factors, so the fit does not feed on itself):

- every removal (lamp_removals.normalised_hours): failed for burnouts, censored otherwise;
  a lamp found dark without a report is interval-censored, failed between
  failed_after_normalised_hours (last known burning) and normalised_hours (found);
- every lamp still burning: censored at its current normalised age (dark positions are
  already counted through their burnout's removal record).

Fits (service.reliability.fitting, .interval): Weibull MLE with right censoring (and interval
censoring when there are found-dark records) when there are two or more distinct failure
times; WeiBayes on the catalogue shape (interval failures at their upper bound, an
approximation); Kaplan-Meier points (likewise). The curve forecasts use is the credibility
blend of service.reliability.credibility: "catalogue" without failures, "blend" with weight
Z = r/(r+k), "field" once Z >= 0.9 and the field shape is well determined.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
from numpy.typing import ArrayLike, NDArray
from sqlalchemy import case, func, select
from sqlalchemy.orm import Session

from service.catalogue.lamp_model import LampModel
from service.catalogue.resolved import CurveInUse, TypeTable, build_table, catalogue_models
from service.config import get_settings
from service.events.models import LampRemoval
from service.forecasting.fit_cache import cache as fit_cache
from service.readings.ages import position_ages
from service.reliability.credibility import blend_curve
from service.reliability.fitting import (
    CurveChoice,
    KaplanMeier,
    WeibullFit,
    choose_curve,
    fit_weibull,
    kaplan_meier,
    weibayes,
)
from service.reliability.fleet import evaluate_fleet
from service.reliability.interval import fit_interval_weibull

FloatArray = NDArray[np.float64]


@dataclass(frozen=True)
class FieldData:
    """Survival records of one lamp type (optionally one site), normalised hours."""

    times_h: FloatArray
    failed: NDArray[np.bool_]
    n_removed: int
    n_in_service: int
    # Lower bound of an interval-censored failure (NaN: exact failure or censored record).
    failed_after_h: FloatArray = field(default_factory=lambda: np.zeros(0))


@dataclass(frozen=True)
class FieldFit:
    """Fits of one lamp type's field records and the curve forecasts use."""

    data: FieldData
    mle: WeibullFit | None
    mle_error: str | None
    weibayes: WeibullFit | None
    kaplan_meier: KaplanMeier | None
    choice: CurveChoice
    curve: CurveInUse


def field_data(
    session: Session, model: LampModel, lamp_type_id: int, site_id: int | None = None
) -> FieldData:
    """Removals and burning lamps of a lamp type as (normalised hours, failed) records."""
    stmt = select(
        LampRemoval.normalised_hours, LampRemoval.failed, LampRemoval.failed_after_normalised_hours
    ).where(LampRemoval.lamp_type_id == lamp_type_id)
    if site_id is not None:
        stmt = stmt.where(LampRemoval.site_id == site_id)
    rows = session.execute(stmt).all()
    t_rem = np.array([r[0] for r in rows], dtype=np.float64)
    f_rem = np.array([bool(r[1]) for r in rows], dtype=bool)
    lo_rem = np.array([np.nan if r[2] is None else r[2] for r in rows], dtype=np.float64)
    ages = position_ages(session, site_id=site_id, lamp_type_id=lamp_type_id)
    live = ~ages.burned_out & (ages.age_h > 0)
    t_live = np.zeros(0)
    if live.any():
        # Each lamp on its fixture's ballast, as the removals were normalised.
        kinds = ages.ballast_kind[live]
        types = build_table({lamp_type_id: model}, {}, ages.lamp_type_id[live], kinds)
        res = evaluate_fleet(
            types.table,
            types.index(ages.lamp_type_id[live], kinds),
            ages.age_h[live],
            ages.voltage_v[live],
            ages.hours_per_start[live],
            0.0,
            history=ages.history.take(live, ages.size),
        )
        t_live = res.rated_age_h  # wear accumulated over the supply history
    times = np.concatenate((t_rem, t_live))
    failed = np.concatenate((f_rem, np.zeros(t_live.size, dtype=bool)))
    lower = np.concatenate((np.where(f_rem, lo_rem, np.nan), np.full(t_live.size, np.nan)))
    return FieldData(times, failed, int(t_rem.size), int(t_live.size), lower)


def fit_field(
    session: Session,
    model: LampModel,
    lamp_type_id: int,
    site_id: int | None = None,
    *,
    confidence: float = 0.90,
) -> FieldFit:
    """Weibull MLE, WeiBayes and Kaplan-Meier for a lamp type, and the curve choice."""
    data = field_data(session, model, lamp_type_id, site_id)
    r = int(data.failed.sum())
    mle: WeibullFit | None = None
    mle_error: str | None = None
    wb: WeibullFit | None = None
    km: KaplanMeier | None = None
    if data.times_h.size:
        km = kaplan_meier(data.times_h, data.failed, confidence=0.95)
        if np.any(data.times_h > 0):
            wb = weibayes(data.times_h, data.failed, model.shape, confidence=confidence)
        try:
            mle = _mle(data, confidence)
        except (ValueError, ArithmeticError, np.linalg.LinAlgError) as exc:
            mle_error = str(exc)
    else:
        mle_error = "no lamp records"
    choice = choose_curve(r, mle, model.shape, model.scale_h)
    well_determined = choice.method == "mle" and mle is not None
    field_est = mle if well_determined else wb
    blended = blend_curve(
        r,
        field_est,
        model.shape,
        model.scale_h,
        shape_well_determined=well_determined,
        confidence=confidence,
    )
    curve = CurveInUse(
        blended.name,
        blended.shape,
        blended.scale,
        blended.rule,
        weight=blended.weight,
        scale_bounds_h=blended.scale_bounds,
        confidence=blended.confidence,
        shape_bounds=field_est.shape_bounds if blended.name == "field" and field_est else None,
    )
    return FieldFit(data, mle, mle_error, wb, km, choice, curve)


def _mle(data: FieldData, confidence: float) -> WeibullFit:
    """The field MLE: right-censored, or interval-censored when found-dark records exist."""
    interval = ~np.isnan(data.failed_after_h) if data.failed_after_h.size else None
    if interval is None or not interval.any():
        return fit_weibull(data.times_h, data.failed, confidence=confidence)
    lower = np.where(interval, data.failed_after_h, data.times_h)
    upper = np.where(data.failed, data.times_h, np.inf)
    fit = fit_interval_weibull(lower, upper, confidence=confidence)
    return WeibullFit(
        shape=fit.shape,
        scale=fit.scale,
        shape_bounds=fit.shape_bounds,
        scale_bounds=fit.scale_bounds,
        confidence=confidence,
        n_failures=fit.n_exact + fit.n_interval,
        n_censored=fit.n_censored,
        method="mle",
        log_likelihood=fit.log_likelihood,
    )


def curves_in_use(session: Session, models: dict[int, LampModel]) -> dict[int, CurveInUse]:
    """The curve each lamp type's forecasts use (all sites); catalogue without failures.

    Reused from the fit cache (forecasting/fit_cache.py) while the type's removals are
    unchanged and the entry is younger than `field_fit_cache_s`.
    """
    failed = func.sum(case((LampRemoval.failed.is_(True), 1), else_=0))
    rows = list(
        session.execute(
            select(LampRemoval.lamp_type_id, failed, func.count(), func.max(LampRemoval.id))
            .where(LampRemoval.lamp_type_id.in_(list(models)))
            .group_by(LampRemoval.lamp_type_id)
        ).all()
    )
    ttl = get_settings().field_fit_cache_s
    out: dict[int, CurveInUse] = {}
    for type_id, n_failed, n_all, newest in rows:
        if not n_failed:
            continue
        tid, model = int(type_id), models[int(type_id)]
        # Any new removal of this type changes the counts or the newest id: a new key.
        key = (tid, repr(model), int(n_failed), int(n_all), int(newest))
        out[tid] = fit_cache.curve(key, ttl, lambda: fit_field(session, model, tid).curve)  # noqa: B023
    return out


def load_fitted_types(
    session: Session,
    lamp_type_ids: ArrayLike,
    *,
    field_fit: bool = True,
    ballast_kinds: ArrayLike | None = None,
) -> TypeTable:
    """The type table with each type's field-fit curve where it replaces the catalogue's."""
    models = catalogue_models(session, lamp_type_ids)
    in_use = curves_in_use(session, models) if field_fit and models else {}
    return build_table(models, in_use, lamp_type_ids, ballast_kinds)
