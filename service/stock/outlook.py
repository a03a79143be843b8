"""The stock level week by week: what is available now less the demand, plus deliveries.

The mean level subtracts the cumulative mean demand; the level at the service level
subtracts the level quantile of cumulative demand by the normal approximation (weekly
variances added, positions independent), continuity-corrected as in stock.demand.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from service.stock.demand import FloatArray, IntArray, quantile_normal


@dataclass(frozen=True)
class Level:
    """Projected available lamps at the end of each week."""

    demand_mean: FloatArray
    received: IntArray
    level_mean: FloatArray
    level_at_service_level: FloatArray


def project(
    available: int,
    mean: FloatArray,
    var: FloatArray,
    level: float,
    order_quantity: int = 0,
    arrives_week: int | None = None,
) -> Level:
    """Week-end levels with an optional delivery arriving in week arrives_week (1-based)."""
    h = mean.size
    received = np.zeros(h, dtype=np.int64)
    if order_quantity and arrives_week is not None and 1 <= arrives_week <= h:
        received[arrives_week - 1] = order_quantity
    cum_mean = np.cumsum(mean)
    cum_var = np.cumsum(var)
    cum_q = np.array(
        [quantile_normal(float(m), float(v), level) for m, v in zip(cum_mean, cum_var, strict=True)]
    )
    cum_in = np.cumsum(received)
    return Level(
        demand_mean=mean,
        received=received,
        level_mean=available - cum_mean + cum_in,
        level_at_service_level=(available - cum_q + cum_in).astype(float),
    )
