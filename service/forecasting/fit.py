"""Field fit per lamp type: removals and lamps in service as survival records.

Records, in rated-voltage-equivalent hours (burn hours / life factor, the life factor being
voltage x switching from the catalogue model, so the fit does not feed on itself):

- every removal (lamp_removals.normalised_hours): failed for burnouts, censored otherwise;
- every lamp still burning: censored at its current normalised age (dark positions are
  already counted through their burnout's removal record).

Fits (service.reliability.fitting): Weibull MLE with right censoring when there are two or
more distinct failure times; WeiBayes on the catalogue shape; Kaplan-Meier points.
fitting.choose_curve picks the curve the forecasts use, across all sites of the type.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike, NDArray
from sqlalchemy import func, select
from sqlalchemy.orm import Session

from service.catalogue.model import LampModel
from service.catalogue.resolved import CurveInUse, TypeTable, build_table, catalogue_models
from service.events.models import LampRemoval
from service.readings.ages import position_ages
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

FloatArray = NDArray[np.float64]


@dataclass(frozen=True)
class FieldData:
    """Survival records of one lamp type (optionally one site), normalised hours."""

    times_h: FloatArray
    failed: NDArray[np.bool_]
    n_removed: int
    n_in_service: int


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
    stmt = select(LampRemoval.normalised_hours, LampRemoval.failed).where(
        LampRemoval.lamp_type_id == lamp_type_id
    )
    if site_id is not None:
        stmt = stmt.where(LampRemoval.site_id == site_id)
    rows = session.execute(stmt).all()
    t_rem = np.array([r[0] for r in rows], dtype=np.float64)
    f_rem = np.array([bool(r[1]) for r in rows], dtype=bool)
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
    return FieldData(times, failed, int(t_rem.size), int(t_live.size))


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
            mle = fit_weibull(data.times_h, data.failed, confidence=confidence)
        except (ValueError, ArithmeticError, np.linalg.LinAlgError) as exc:
            mle_error = str(exc)
    else:
        mle_error = "no lamp records"
    choice = choose_curve(r, mle, model.shape, model.scale_h)
    if choice.method == "mle" and mle is not None:
        curve = CurveInUse("mle", mle.shape, mle.scale, choice.reason)
    elif choice.method == "weibayes" and wb is not None:
        curve = CurveInUse("weibayes", model.shape, wb.scale, choice.reason)
    else:
        curve = CurveInUse("catalogue", model.shape, model.scale_h, choice.reason)
    return FieldFit(data, mle, mle_error, wb, km, choice, curve)


def curves_in_use(session: Session, models: dict[int, LampModel]) -> dict[int, CurveInUse]:
    """The curve each lamp type's forecasts use (all sites); catalogue without failures."""
    rows = list(
        session.execute(
            select(LampRemoval.lamp_type_id, func.count())
            .where(LampRemoval.lamp_type_id.in_(list(models)), LampRemoval.failed.is_(True))
            .group_by(LampRemoval.lamp_type_id)
        ).all()
    )
    counts = {int(r[0]): int(r[1]) for r in rows}
    out: dict[int, CurveInUse] = {}
    for type_id, n in counts.items():
        if n > 0:
            out[int(type_id)] = fit_field(session, models[int(type_id)], int(type_id)).curve
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
