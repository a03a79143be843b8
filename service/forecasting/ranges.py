"""Burnout ranges for forecasts: which positions fail, and how sure the life curves are.

Per lamp type, the parameters' uncertainty (reliability/uncertainty.py, delta method):
- ln eta: its standard deviation from the curve in use's scale bounds (the field fit's
  Fisher-information bounds, or the credibility blend's posterior); a catalogue curve
  with no field record takes the credibility prior, sigma = ln 1.5 / 1.645 (the stated
  assumption that the catalogue is within x1.5 of the field at 90 %,
  reliability/credibility.py);
- ln beta: from the field fit's shape bounds when the field shape is used as it is; held
  (no uncertainty) for the catalogue, WeiBayes and blended shapes: an understatement,
  stated in the method text;
- correlation of ln beta and ln eta: not kept by the fits, taken as 0 (stated).
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np
from numpy.typing import NDArray

from service.catalogue.resolved import CurveInUse, TypeTable
from service.reliability.credibility import SIGMA_LN_SCALE
from service.reliability.uncertainty import (
    CountRange,
    count_range,
    parameter_variance,
    sd_from_bounds,
    window_gradients,
)

FloatArray = NDArray[np.float64]
IntArray = NDArray[np.int64]

LEVEL = 0.90
METHOD_NOTE = (
    "burnouts_low/high: central 90 % range of the count of lamps now burning that burn out "
    "within the horizon (none replaced): {method}; shape uncertainty only where the field "
    "shape is used as it is, scale-shape correlation taken as 0."
)


@dataclass(frozen=True)
class ParamSpread:
    """Per-position gradients of P(burn out in the horizon) and per-type parameter spreads."""

    group: IntArray  # each position's lamp type group
    d_ln_shape: FloatArray
    d_ln_scale: FloatArray
    sd_ln_shape: FloatArray  # per group
    sd_ln_scale: FloatArray  # per group

    def count(self, p: FloatArray, sel: Any = slice(None)) -> CountRange:
        """The range of the count of events p over the selected positions."""
        var_p = parameter_variance(
            self.group[sel],
            self.d_ln_shape[sel],
            self.d_ln_scale[sel],
            self.sd_ln_shape,
            self.sd_ln_scale,
        )
        return count_range(p[sel], var_p, LEVEL)


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


def param_spread(
    types: TypeTable,
    lamp_type_id: IntArray,
    type_row: IntArray,
    effective_age_h: FloatArray,
    horizon_h: FloatArray,
    scale_h: FloatArray,
) -> ParamSpread:
    """Gradients per position and the spread of each lamp type's curve parameters."""
    ids, group = np.unique(lamp_type_id, return_inverse=True)
    beta = types.table.shape[type_row]
    _, d_shape, d_scale = window_gradients(effective_age_h, horizon_h, beta, scale_h)
    sds = [_sds(types.curve(int(i))) for i in ids.tolist()]
    return ParamSpread(
        np.asarray(group, dtype=np.int64).ravel(),
        d_shape,
        d_scale,
        np.array([s[0] for s in sds], dtype=np.float64),
        np.array([s[1] for s in sds], dtype=np.float64),
    )
