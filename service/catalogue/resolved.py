"""Resolved lamp models of a set of positions as the numeric core's table, with curves in use.

The catalogue model comes from service.catalogue.lamp_model.resolve_lamp_model. The catalogue
owns this table and its loading so every domain above it (events, forecasting, planning,
work orders) takes lamp models from here. Curves: the catalogue Weibull unless the caller
hands the field fit's choice (service.forecasting.fit.load_fitted_types does).

Ballast: given the fixtures' ballast kinds (Fixture.ballast_kind), the table has one row per
(lamp type, ballast) pair present, each the type's model with that ballast's power gain and
voltage band (reliability.technologies), so a position's voltage response follows the
ballast its fixture runs on. Filament lamps always run on "none" and LEDs on "led_driver";
a discharge fixture's own kind is used ("none" there, never valid, falls back to the lamp
type's ballast). Without ballast kinds each type has one row, on its own ballast.
"""

from __future__ import annotations

from dataclasses import dataclass, replace

import numpy as np
from numpy.typing import ArrayLike, NDArray
from sqlalchemy import select
from sqlalchemy.orm import Session

from service.catalogue.lamp_model import LampModel, lamp_type_table, resolve_lamp_model
from service.catalogue.models import LampType
from service.reliability.fleet import LampTypeTable
from service.reliability.technologies import BALLAST_POWER_GAIN, BALLAST_VOLTAGE_BAND, BALLASTS

IntArray = NDArray[np.int64]
StrArray = NDArray[np.str_]

_CODES = np.array(sorted(BALLASTS))  # ballast kind -> code by searchsorted
_NCODES = len(BALLASTS)
_DISCHARGE = np.array([b for b in BALLASTS if b != "none"])
FIXTURE = "fixture"  # source label of a ballast taken from the fixture


@dataclass(frozen=True)
class CurveInUse:
    """The life curve a lamp type's forecasts use, and why."""

    method: str  # "catalogue", "blend" or "field" (service.reliability.credibility)
    shape: float  # Weibull beta
    scale_h: float  # Weibull eta at rated volts and cycle, burn hours
    reason: str
    weight: float = 0.0  # credibility Z of the field data (0 = catalogue alone)
    scale_bounds_h: tuple[float, float] | None = None  # the scale's bounds at `confidence`
    confidence: float = 0.90
    # The shape's bounds at `confidence` when the field fit's shape is used as it is ("field").
    shape_bounds: tuple[float, float] | None = None


def with_ballast(model: LampModel, ballast: str) -> LampModel:
    """The model on another ballast: that ballast's power gain and voltage band."""
    if ballast == model.ballast_behaviour:
        return model
    return replace(
        model,
        ballast_behaviour=ballast,
        ballast_gain=BALLAST_POWER_GAIN[ballast],
        voltage_band=BALLAST_VOLTAGE_BAND[ballast],
        sources={**model.sources, "ballast_behaviour": FIXTURE},
    )


def _fixed_ballast(model: LampModel) -> str:
    """The ballast a lamp runs on whatever the fixture says ("" = the fixture's)."""
    if model.is_filament:
        return "none"
    if model.technology == "led":
        return "led_driver"
    return ""


def _ballast_of(
    type_ids: IntArray,
    own: StrArray,
    fixed: StrArray,
    lamp_type_id: ArrayLike,
    ballast_kind: ArrayLike | None,
) -> StrArray:
    t = np.searchsorted(type_ids, np.asarray(lamp_type_id, dtype=np.int64))
    if ballast_kind is None:
        return own[t]
    b = np.asarray(ballast_kind, dtype=str)
    return np.where(fixed[t] != "", fixed[t], np.where(np.isin(b, _DISCHARGE), b, own[t]))


def _ballast_codes(
    type_ids: IntArray,
    own: StrArray,
    fixed: StrArray,
    lamp_type_id: IntArray,
    ballast_kind: ArrayLike | None,
) -> IntArray:
    """Codes (in _CODES) of the ballast each position runs on: _ballast_of by integer codes.

    The per-position strings are compared only once (searchsorted into the short code list);
    the choice between fixed, fixture and own ballast is then made on integers.
    """
    t = np.searchsorted(type_ids, lamp_type_id)
    own_c = np.searchsorted(_CODES, own).astype(np.int64)[t]
    if ballast_kind is None:
        return own_c
    fixed_c = np.where(fixed != "", np.searchsorted(_CODES, fixed), -1).astype(np.int64)[t]
    b = np.asarray(ballast_kind, dtype=str)
    bc = np.minimum(np.searchsorted(_CODES, b), _NCODES - 1).astype(np.int64)
    discharge = np.isin(_CODES, _DISCHARGE)[bc] & (_CODES[bc] == b)
    return np.where(fixed_c >= 0, fixed_c, np.where(discharge, bc, own_c))


def _key(type_id: ArrayLike, ballast: ArrayLike) -> IntArray:
    codes = np.searchsorted(_CODES, np.asarray(ballast, dtype=str))
    return np.asarray(type_id, dtype=np.int64) * _NCODES + codes.astype(np.int64)


@dataclass(frozen=True)
class TypeTable:
    """Rows of (lamp type, ballast), sorted, with models, curves in use and the core's table."""

    ids: IntArray  # lamp type id of each row
    ballasts: StrArray  # ballast kind of each row
    models: tuple[LampModel, ...]
    curves: tuple[CurveInUse, ...]
    table: LampTypeTable
    type_ids: IntArray  # the distinct lamp type ids, sorted
    own: StrArray  # per distinct type: its own (catalogue or default) ballast
    fixed: StrArray  # per distinct type: the ballast it always runs on, "" = the fixture's

    def ballast_of(
        self, lamp_type_id: ArrayLike, ballast_kind: ArrayLike | None = None
    ) -> StrArray:
        """The ballast each position's lamp runs on (its type's own without ballast kinds)."""
        return _ballast_of(self.type_ids, self.own, self.fixed, lamp_type_id, ballast_kind)

    def index(self, lamp_type_id: ArrayLike, ballast_kind: ArrayLike | None = None) -> IntArray:
        """Row of each (lamp type id, fixture ballast kind) in the table."""
        keys = _key(self.ids, self.ballasts)
        lt = np.asarray(lamp_type_id, dtype=np.int64)
        code = _ballast_codes(self.type_ids, self.own, self.fixed, lt, ballast_kind)
        return np.searchsorted(keys, lt * _NCODES + code).astype(np.int64)

    def curve(self, lamp_type_id: int) -> CurveInUse:
        """The curve in use for one lamp type."""
        return self.curves[int(np.searchsorted(self.ids, lamp_type_id))]


def catalogue_models(session: Session, lamp_type_ids: ArrayLike) -> dict[int, LampModel]:
    """Resolved catalogue models of the given lamp types, by id."""
    ids = sorted({int(i) for i in np.asarray(lamp_type_ids).ravel()})
    if not ids:
        return {}
    rows = session.scalars(select(LampType).where(LampType.id.in_(ids))).all()
    return {row.id: resolve_lamp_model(row) for row in rows}


def build_table(
    models: dict[int, LampModel],
    curves: dict[int, CurveInUse],
    lamp_type_ids: ArrayLike,
    ballast_kinds: ArrayLike | None = None,
) -> TypeTable:
    """The table of the (type, ballast) pairs present among positions (types from models)."""
    type_ids = np.array(sorted(models), dtype=np.int64)
    own = np.array([models[i].ballast_behaviour for i in type_ids.tolist()], dtype="<U12")
    fixed = np.array([_fixed_ballast(models[i]) for i in type_ids.tolist()], dtype="<U12")
    if ballast_kinds is None:
        pair_ids, pair_b = type_ids, own
    else:
        ids = np.asarray(lamp_type_ids, dtype=np.int64)
        present = _key(ids, _ballast_of(type_ids, own, fixed, ids, ballast_kinds))
        # Each type's own row is kept too, so a lookup without ballast kinds still works.
        keys = np.unique(np.concatenate((_key(type_ids, own), present)))
        pair_ids = keys // _NCODES
        pair_b = _CODES[keys % _NCODES].astype("<U12")
    chosen: list[LampModel] = []
    used: list[CurveInUse] = []
    for i, b in zip(pair_ids.tolist(), pair_b.tolist(), strict=True):
        m = models[i]
        c = curves.get(i, CurveInUse("catalogue", m.shape, m.scale_h, "catalogue curve"))
        used.append(c)
        chosen.append(with_ballast(replace(m, shape=c.shape, scale_h=c.scale_h), b))
    return TypeTable(
        pair_ids, pair_b, tuple(chosen), tuple(used), lamp_type_table(chosen), type_ids, own, fixed
    )


def load_types(
    session: Session, lamp_type_ids: ArrayLike, *, ballast_kinds: ArrayLike | None = None
) -> TypeTable:
    """The type table on catalogue curves (per ballast present when ballast kinds are given)."""
    return build_table(catalogue_models(session, lamp_type_ids), {}, lamp_type_ids, ballast_kinds)
