"""Lamp demand per week: spot replacements as a Poisson-binomial sum, plus group relamps.

The Poisson-binomial arithmetic lives in service/reliability/poisson_binomial.py (one home,
shared with the forecast's burnout range); this module applies it to weekly demand.

Each position j contributes, in week i, a replacement with probability p_ij: the increase
of its expected replacements (per-position delayed renewal, forecasting.spot_replacements) over the
week, clipped to [0, 1] (a lamp failing twice inside one week is negligible next to lamp
lives of thousands of hours). Positions fail independently, so a week's spot count is
Poisson-binomial with mean sum p and variance sum p(1 - p).

- Exact (groups of at most EXACT_MAX positions): the pmf by the discrete Fourier transform
  of the characteristic function, P(K = k) = 1/(n+1) sum_l z_l exp(-i w l k),
  z_l = prod_j (1 - p_j + p_j exp(i w l)), w = 2 pi / (n + 1) [Fernandez & Williams 2010,
  "Closed-form expression for the Poisson-binomial probability density function", IEEE
  Trans. Aerospace and Electronic Systems 46(2); Hong 2013, Comput. Stat. Data Anal. 59].
- Otherwise the normal approximation with a continuity correction: the smallest k with
  Phi((k + 0.5 - mean) / sd) >= level, i.e. k = ceil(mean + z sd - 0.5) [central limit
  theorem; the half-unit correction is textbook practice for discrete counts].

A group relamp due in week g takes all its positions' lamps that week; after it a position
starts again from a new lamp, so its spot increments follow the renewal function M of a
new lamp from week g on.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray

from service.reliability.poisson_binomial import (
    EXACT_MAX,
    pmf_dft,
    quantile,
    quantile_exact,
    quantile_normal,
)

__all__ = ["EXACT_MAX", "pmf_dft", "quantile", "quantile_exact", "quantile_normal"]

FloatArray = NDArray[np.float64]
IntArray = NDArray[np.int64]


def weekly_increments(cum: FloatArray) -> FloatArray:
    """Per-week replacement probabilities from cumulative expected replacements (n, H+1)."""
    return np.clip(np.diff(cum, axis=1), 0.0, 1.0)


def cumulative_with_group(
    before: FloatArray, after_new: FloatArray, group_week: IntArray
) -> FloatArray:
    """Cumulative expected spot replacements at week boundaries 0..H with a group relamp.

    before[j, t]: N_a(t weeks) of the lamp in place now; after_new[j, s]: M(s weeks) of a
    new lamp; group_week[j]: the week the group relamp puts a new lamp in (>= H: none).
    Up to the relamp the current lamp's curve; afterwards its value then plus M since.
    """
    h1 = before.shape[1]
    t = np.arange(h1)[None, :]
    g = np.minimum(group_week, h1 - 1)[:, None]
    has = (group_week < h1 - 1)[:, None]
    at_g = np.take_along_axis(before, g, axis=1)
    since = np.clip(t - g, 0, h1 - 1)
    after = at_g + np.take_along_axis(after_new, since, axis=1)
    return np.where(has & (t > g), after, before)


@dataclass(frozen=True)
class WeekDemand:
    """One group of positions' weekly demand (arrays over weeks)."""

    spot_mean: FloatArray
    spot_var: FloatArray
    spot_quantile: IntArray
    group: IntArray
    breakage: FloatArray
    method: str

    @property
    def total_mean(self) -> FloatArray:
        """Mean lamps needed per week: spot, group and breakage."""
        return self.spot_mean + self.group + self.breakage


def week_demand(
    p: FloatArray,
    group: IntArray,
    level: float,
    breakage_fraction: float,
    dark_now: int = 0,
) -> WeekDemand:
    """A group's weekly demand from its positions' weekly probabilities p (n, H).

    dark_now: positions dark today, each needing a lamp in the first week (counted as
    certain spot demand). Breakage: a fraction of the lamps handled (common practice).
    """
    h = p.shape[1]
    mean = p.sum(axis=0)
    var = (p * (1.0 - p)).sum(axis=0)
    method = "exact" if p.shape[0] <= EXACT_MAX else "normal"
    q = np.zeros(h, dtype=np.int64)
    for i in range(h):
        q[i] = (
            quantile(p[:, i], level)[0]
            if method == "exact"
            else quantile_normal(float(mean[i]), float(var[i]), level, p.shape[0])
        )
    mean = mean.copy()
    if h:
        mean[0] += dark_now
        q[0] += dark_now
    breakage = breakage_fraction * (mean + group)
    return WeekDemand(mean, var, q, group.astype(np.int64), breakage, method)
