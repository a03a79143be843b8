"""Cumulative exposure: the rated-condition age of a lamp that burned under varying supply.

Under an inverse-power (or any accelerated-failure-time) life law the wear rate at a
condition is 1 / life_factor per burn hour, so a lamp that burned Δt_i hours at conditions
with life factors f_i has used

    a_rated = Σ Δt_i / f_i        rated-condition-equivalent burn hours

of its rated-condition life [published: Nelson, *Accelerated Testing*, ch. 10, cumulative
exposure model]. The life law is convex in voltage, so the mean voltage understates wear:
half the hours at 0.95 and half at 1.05 of rated voltage with life ∝ V^-13 gives an
equivalent life factor 1 / (0.5·0.95^13 + 0.5·1.05^13) = 0.834, against 1.000 at the mean.

The survival of such a lamp is S = exp(-(a_rated/η_rated)^β), and the hours still to come
at the present condition (life factor f_now) add Δt / f_now; the equivalent age at the
present condition is a_rated · f_now (the age that, at today's supply, has done the same
wear). Only life is accumulated: lamp lumen depreciation in hours follows burn hours, and
the curves in fractions of rated life follow a_rated.

A history is a list of segments (position row, burn hours, volts, and starts where they
are known); hours of a position not covered by its segments are taken at its present
condition. A segment's switching factor comes from its own burn hours per start (hours /
starts) where its starts are known, so the life factor of segment i is
f_i = f_V(V_i) · f_sw(Δt_i / starts_i); a segment without known starts (NaN) takes the
position's hours per start over the lamp's life. Hours are burn hours, volts volts.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
from numpy.typing import ArrayLike, NDArray

FloatArray = NDArray[np.float64]
IntArray = NDArray[np.intp]


@dataclass(frozen=True, eq=False)
class ExposureHistory:
    """Burn-hour segments of positions under known supply voltages (parallel arrays)."""

    position: IntArray  # row of the position in the fleet arrays
    hours: FloatArray  # burn hours of the segment
    voltage: FloatArray  # volts during the segment (NaN = rated)
    # starts during the segment (NaN = unknown: the position's hours per start); empty = none
    starts: FloatArray = field(default_factory=lambda: np.zeros(0))
    has_starts: bool = field(init=False, default=False)  # some segment's starts are known

    def __post_init__(self) -> None:
        p = np.asarray(self.position).astype(np.intp, copy=False)
        h = np.asarray(self.hours, dtype=np.float64)
        v = np.asarray(self.voltage, dtype=np.float64)
        st = np.asarray(self.starts, dtype=np.float64)
        if st.size == 0:
            st = np.full(p.shape, np.nan)
        if p.ndim != 1 or p.shape != h.shape or p.shape != v.shape or st.shape != p.shape:
            raise ValueError(
                "history position, hours, voltage and starts must be 1-D of one length"
            )
        if np.any(st < 0) or np.any(np.isinf(st)):
            raise ValueError("history starts must be finite, non-negative counts (NaN = unknown)")
        st = np.where(st > 0, st, np.nan)  # no starts counted: unknown, not "never switched"
        if np.any(~np.isfinite(h)) or np.any(h < 0):
            raise ValueError("history hours must be finite, non-negative burn hours")
        if np.any(v <= 0):
            raise ValueError("history voltages must be positive volts")
        if p.size and p.min() < 0:
            raise ValueError("history positions must be row numbers (>= 0)")
        object.__setattr__(self, "position", p)
        object.__setattr__(self, "hours", h)
        object.__setattr__(self, "voltage", v)
        object.__setattr__(self, "starts", st)
        object.__setattr__(self, "has_starts", bool(st.size) and not np.isnan(st).all())

    @property
    def size(self) -> int:
        """Number of segments."""
        return int(self.position.size)

    @classmethod
    def empty(cls) -> ExposureHistory:
        """No segments."""
        return cls(np.zeros(0, np.intp), np.zeros(0), np.zeros(0))

    def take(self, rows: ArrayLike, n_rows: int) -> ExposureHistory:
        """Segments of a subset of rows (index or mask over n_rows), renumbered to the subset."""
        if n_rows == 0:
            return ExposureHistory.empty()
        sel = np.arange(n_rows)[np.asarray(rows)]
        new = np.full(n_rows, -1, dtype=np.intp)
        new[sel] = np.arange(sel.size)
        keep = (self.position < n_rows) & (new[np.minimum(self.position, n_rows - 1)] >= 0)
        return ExposureHistory(
            new[self.position[keep]], self.hours[keep], self.voltage[keep], self.starts[keep]
        )

    def drop_rows(self, rows_mask: ArrayLike) -> ExposureHistory:
        """The same history without the segments of the masked rows (row numbers kept)."""
        mask = np.asarray(rows_mask, dtype=bool)
        if self.size == 0:
            return self
        keep = ~mask[self.position]
        return ExposureHistory(
            self.position[keep], self.hours[keep], self.voltage[keep], self.starts[keep]
        )

    def segment_hours_per_start(self) -> FloatArray:
        """Burn hours per start of each segment (NaN where its starts are unknown or zero)."""
        return np.asarray(self.hours / self.starts, dtype=np.float64)  # starts > 0 or NaN

    def covered_hours(self, n_rows: int) -> FloatArray:
        """Burn hours covered by segments, per row."""
        got = np.bincount(self.position, weights=self.hours, minlength=n_rows)[:n_rows]
        return np.asarray(got, dtype=np.float64)


def accumulated_exposure(
    position: ArrayLike, hours: ArrayLike, life_factor: ArrayLike, n_rows: int
) -> FloatArray:
    """Σ Δt_i / f_i per row: rated-condition-equivalent burn hours of each position."""
    p = np.asarray(position).astype(np.intp, copy=False)
    h = np.asarray(hours, dtype=np.float64)
    f = np.asarray(life_factor, dtype=np.float64)
    if np.any(~(f > 0)):
        raise ValueError("life factors must be positive")
    return np.asarray(np.bincount(p, weights=h / f, minlength=n_rows)[:n_rows], dtype=np.float64)


def equivalent_life_factor(hours: ArrayLike, life_factor: ArrayLike) -> float:
    """The single life factor that does the same wear: Σ Δt / Σ (Δt / f)."""
    h = np.asarray(hours, dtype=np.float64)
    f = np.asarray(life_factor, dtype=np.float64)
    if h.size == 0 or not h.sum() > 0:
        raise ValueError("need some burn hours")
    if np.any(~(f > 0)):
        raise ValueError("life factors must be positive")
    return float(h.sum() / np.sum(h / f))


def rated_age(
    age_h: ArrayLike,
    life_factor_now: ArrayLike,
    history_exposure: ArrayLike,
    covered_h: ArrayLike,
) -> FloatArray:
    """Rated-condition age: the history's exposure plus uncovered hours at today's factor."""
    age = np.asarray(age_h, dtype=np.float64)
    rest = np.maximum(age - np.asarray(covered_h, dtype=np.float64), 0.0)
    return np.asarray(history_exposure, dtype=np.float64) + rest / np.asarray(
        life_factor_now, dtype=np.float64
    )
