"""What-if curves: S(t), lumen fraction and M(t) for a lamp type at a voltage and cycle."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray
from sqlalchemy.orm import Session

from service.api.errors import Invalid, NotFound
from service.catalogue.resolved import CurveInUse
from service.forecasting.fit import load_fitted_types
from service.reliability.fleet import evaluate_fleet
from service.reliability.renewal import weibull_renewal

FloatArray = NDArray[np.float64]


@dataclass(frozen=True)
class CurveResult:
    """Curves on a grid of burn hours, and the factors and curve behind them."""

    t_h: FloatArray
    survival: FloatArray
    lumen_fraction: FloatArray
    renewal_m: FloatArray
    life_factor: float
    light_factor: float
    power_factor: float
    scale_h: float  # effective Weibull eta at these conditions, hours
    shape: float
    warn_voltage: bool
    warn_switching: bool
    curve: CurveInUse


def lamp_curve(
    session: Session,
    lamp_type_id: int,
    *,
    voltage_v: float | None,
    hours_per_start: float | None,
    t_max_h: float | None,
    points: int,
    field_fit: bool,
) -> CurveResult:
    """S(t), lumen fraction and renewal M(t) for one lamp type under given conditions."""
    types = load_fitted_types(session, [lamp_type_id], field_fit=field_fit)
    if types.ids.size == 0:
        raise NotFound(f"lamp type {lamp_type_id} does not exist.", resource="lamp type")
    model = types.models[0]
    volts = model.rated_volts if voltage_v is None else voltage_v
    hps = np.nan if hours_per_start is None else hours_per_start
    one = evaluate_fleet(types.table, np.zeros(1, dtype=np.int64), 0.0, volts, hps, 0.0)
    eta = float(one.scale_h[0])
    t_max = 3.0 * eta if t_max_h is None else t_max_h
    if not t_max > 0:
        raise Invalid(
            "t_max_h must be positive hours.",
            errors=[{"field": "t_max_h", "in": "query", "message": "must be > 0"}],
        )
    t = np.linspace(0.0, t_max, points)
    res = evaluate_fleet(types.table, np.zeros(points, dtype=np.int64), t, volts, hps, 0.0)
    renewal = weibull_renewal(model.shape, eta, t_max, max(2000, points))
    return CurveResult(
        t_h=t,
        survival=res.survival,
        lumen_fraction=res.lumen_fraction,
        renewal_m=renewal.at(t),
        life_factor=float(one.life_factor[0]),
        light_factor=float(one.light_factor[0]),
        power_factor=float(one.power_factor[0]),
        scale_h=eta,
        shape=model.shape,
        warn_voltage=bool(one.warn_voltage[0]),
        warn_switching=bool(one.warn_switching[0]),
        curve=types.curves[0],
    )
