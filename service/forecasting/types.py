"""Lamp types of a set of positions as the numeric core's table, with the curve in use.

The catalogue model comes from service.catalogue.model.resolve_lamp_model. When asked,
each type's Weibull is replaced by the field fit's choice (fitting.choose_curve): the field
MLE, or the catalogue shape with a WeiBayes scale; see service.forecasting.fit.
"""

from __future__ import annotations

from dataclasses import dataclass, replace

import numpy as np
from numpy.typing import ArrayLike, NDArray
from sqlalchemy import select
from sqlalchemy.orm import Session

from service.catalogue.model import LampModel, lamp_type_table, resolve_lamp_model
from service.catalogue.models import LampType
from service.reliability.fleet import LampTypeTable

IntArray = NDArray[np.int64]


@dataclass(frozen=True)
class CurveInUse:
    """The life curve a lamp type's forecasts use, and why."""

    method: str  # "catalogue", "mle" or "weibayes"
    shape: float  # Weibull beta
    scale_h: float  # Weibull eta at rated volts and cycle, burn hours
    reason: str


@dataclass(frozen=True)
class TypeTable:
    """Lamp types (sorted ids), their resolved models, curves in use and the core's table."""

    ids: IntArray
    models: tuple[LampModel, ...]
    curves: tuple[CurveInUse, ...]
    table: LampTypeTable

    def index(self, lamp_type_id: ArrayLike) -> IntArray:
        """Row of each lamp type id in the table."""
        return np.searchsorted(self.ids, np.asarray(lamp_type_id, dtype=np.int64)).astype(np.int64)

    def curve(self, lamp_type_id: int) -> CurveInUse:
        """The curve in use for one lamp type."""
        return self.curves[int(self.index([lamp_type_id])[0])]


def catalogue_models(session: Session, lamp_type_ids: ArrayLike) -> dict[int, LampModel]:
    """Resolved catalogue models of the given lamp types, by id."""
    ids = sorted({int(i) for i in np.asarray(lamp_type_ids).ravel()})
    if not ids:
        return {}
    rows = session.scalars(select(LampType).where(LampType.id.in_(ids))).all()
    return {row.id: resolve_lamp_model(row) for row in rows}


def load_types(session: Session, lamp_type_ids: ArrayLike, *, field_fit: bool = True) -> TypeTable:
    """The type table for these lamp types; with field_fit, each uses its chosen curve."""
    models = catalogue_models(session, lamp_type_ids)
    ids = np.array(sorted(models), dtype=np.int64)
    chosen: list[LampModel] = []
    curves: list[CurveInUse] = []
    if field_fit and ids.size:
        from service.forecasting.fit import curves_in_use  # fit imports this module

        in_use = curves_in_use(session, models)
    else:
        in_use = {}
    for i in ids.tolist():
        m = models[i]
        c = in_use.get(i, CurveInUse("catalogue", m.shape, m.scale_h, "catalogue curve"))
        curves.append(c)
        chosen.append(replace(m, shape=c.shape, scale_h=c.scale_h))
    return TypeTable(ids, tuple(chosen), tuple(curves), lamp_type_table(chosen))
