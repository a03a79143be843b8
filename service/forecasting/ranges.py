"""Burnout ranges for forecasts: which positions fail, and how sure the life curves are.

The range is the central 90 % of the count's MIXTURE over each lamp type's uncertain curve
(reliability/uncertainty.count_mixture, reliability/mixture.py): the scale always, the shape
where the field fit's shape is used as it is; the earlier delta-method normal interval
undercovered at the catalogue prior's spread. Per lamp type, the parameters' uncertainty:
- ln eta: its standard deviation from the curve in use's scale bounds (the field fit's
  Fisher-information bounds, or the credibility blend's posterior); a catalogue curve
  with no field record takes the credibility prior, sigma = ln 1.5 / 1.645 = 0.246 (the stated
  assumption that the catalogue is within x1.5 of the field at 90 %,
  reliability/credibility.py);
- ln beta: from the field fit's shape bounds when the field shape is used as it is; held
  (no uncertainty) for the catalogue, WeiBayes and blended shapes: an understatement,
  stated in the method text;
- correlation of ln beta and ln eta: not kept by the fits, taken as 0 (stated).
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np

from service.catalogue.resolved import CurveInUse, TypeTable
from service.reliability.arrays import FloatArray, IntArray
from service.reliability.credibility import SIGMA_LN_SCALE
from service.reliability.mixture_batch import FleetCurves, count_mixtures
from service.reliability.uncertainty import (
    CountRange,
    GroupCurve,
    count_mixture,
    sd_from_bounds,
    window_gradients,
)

LEVEL = 0.90
METHOD_NOTE = (
    "burnouts_low/high: central 90 % range of the count of lamps now burning that burn out "
    "within the horizon (none replaced): {method}; shape uncertainty only where the field "
    "shape is used as it is, scale-shape correlation taken as 0."
)


@dataclass(frozen=True)
class ParamSpread:
    """Per-position windows and curves, and per-type parameter spreads, for burnout ranges."""

    group: IntArray  # each position's lamp type group
    age_h: FloatArray  # wear-equivalent age at today's supply
    horizon_h: FloatArray
    shape: FloatArray  # per position
    scale_h: FloatArray  # per position (the life factor applied)
    sd_ln_shape: FloatArray  # per group
    sd_ln_scale: FloatArray  # per group

    @property
    def d_ln_shape(self) -> FloatArray:
        """dp/d ln beta per position (the delta method's gradient, for comparison)."""
        return window_gradients(self.age_h, self.horizon_h, self.shape, self.scale_h)[1]

    @property
    def d_ln_scale(self) -> FloatArray:
        """dp/d ln eta per position."""
        return window_gradients(self.age_h, self.horizon_h, self.shape, self.scale_h)[2]

    def count(self, p: FloatArray | None = None, sel: Any = slice(None)) -> CountRange:
        """The range of the count of burnouts over the selected positions (p: unused, kept
        for the callers; the mixture re-evaluates each position's window at its nodes)."""
        idx = np.arange(self.group.size)[sel]
        grp = self.group[idx]
        groups = []
        for g in np.unique(grp).tolist():
            j = idx[grp == g]
            groups.append(
                GroupCurve(
                    self.age_h[j],
                    self.horizon_h[j],
                    self.shape[j],
                    self.scale_h[j],
                    float(self.sd_ln_shape[g]),
                    float(self.sd_ln_scale[g]),
                )
            )
        return count_mixture(groups, LEVEL)

    def counts(self, selections: Sequence[IntArray]) -> list[CountRange]:
        """count() of many selections (ascending position indices) at once: the same ranges,
        the shared array work done once (reliability/mixture_batch.py)."""
        fleet = FleetCurves(
            self.group,
            self.age_h,
            self.horizon_h,
            self.shape,
            self.scale_h,
            self.sd_ln_shape,
            self.sd_ln_scale,
        )
        return count_mixtures(fleet, selections, LEVEL)


def _sds(curve: CurveInUse) -> tuple[float, float]:
    lo_hi = curve.scale_bounds_h
    sd_scale = (
        sd_from_bounds(lo_hi[0], lo_hi[1], curve.confidence)
        if lo_hi is not None and lo_hi[0] > 0 and lo_hi[1] >= lo_hi[0]
        else SIGMA_LN_SCALE
    )
    sb = curve.shape_bounds
    sd_shape = sd_from_bounds(sb[0], sb[1], curve.confidence) if sb is not None else 0.0
    return sd_shape, sd_scale


def type_spreads(types: TypeTable, lamp_type_ids: IntArray) -> tuple[FloatArray, FloatArray]:
    """(sd ln beta, sd ln eta) of each listed lamp type's curve in use."""
    sds = [_sds(types.curve(int(i))) for i in np.asarray(lamp_type_ids).tolist()]
    return (
        np.array([s[0] for s in sds], dtype=np.float64),
        np.array([s[1] for s in sds], dtype=np.float64),
    )


def param_spread(
    types: TypeTable,
    lamp_type_id: IntArray,
    type_row: IntArray,
    effective_age_h: FloatArray,
    horizon_h: FloatArray,
    scale_h: FloatArray,
) -> ParamSpread:
    """Windows per position and the spread of each lamp type's curve parameters."""
    ids, group = np.unique(lamp_type_id, return_inverse=True)
    n = np.size(lamp_type_id)
    sd_shape, sd_scale = type_spreads(types, ids)
    return ParamSpread(
        np.asarray(group, dtype=np.int64).ravel(),
        np.broadcast_to(np.asarray(effective_age_h, dtype=np.float64), (n,)),
        np.broadcast_to(np.asarray(horizon_h, dtype=np.float64), (n,)),
        np.asarray(types.table.shape[type_row], dtype=np.float64),
        np.broadcast_to(np.asarray(scale_h, dtype=np.float64), (n,)),
        sd_shape,
        sd_scale,
    )


def position_sd_ln_scale(types: TypeTable, lamp_type_id: IntArray) -> FloatArray:
    """Each position's sd of ln eta (its lamp type's curve in use), for stock demand's
    mixture (stock.demand.node_demand); demand mixes the scale only (see there)."""
    ids, inv = np.unique(lamp_type_id, return_inverse=True)
    return type_spreads(types, ids)[1][np.asarray(inv).ravel()]
