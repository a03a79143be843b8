"""Cumulative burn hours of metered targets (fixtures or areas), vectorised with numpy.

A target's burn-hour clock B(t) (hours, t in epoch seconds) is built from its records:

- between its first record's start F and its last record's end E: the records' hours,
  prorated linearly inside a record (records of one target never overlap; gaps between
  records count as dark);
- before F and after E (or everywhere, for a target with no records): the area's schedule,
  rate x elapsed time.

The burn hours a lamp had between t0 and t1 are then B(t1) - B(t0). The same is done for
starts. Every function takes arrays of queries and runs a handful of numpy operations.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray

FloatArray = NDArray[np.float64]
IntArray = NDArray[np.int64]

# Seconds per target on the composite search axis (about 63 years of timestamps).
_SPAN = 2.0e9


@dataclass(frozen=True)
class Timeline:
    """Records of many targets sorted by (target, end) with running totals."""

    keys: IntArray  # distinct target keys, sorted
    lo: IntArray  # first record index of each key
    hi: IntArray  # one past the last record index of each key
    start: FloatArray  # record period start, epoch seconds
    end: FloatArray  # record period end, epoch seconds
    hours: FloatArray  # burn hours in the record
    starts: FloatArray  # starts in the record (0 when not given)
    cum_hours: FloatArray  # running total of hours, global (subtract the key's base)
    cum_starts: FloatArray
    comp_end: FloatArray  # rank x span + (end - base): the search axis
    base: float  # epoch seconds subtracted before searching

    @classmethod
    def build(
        cls,
        key: IntArray,
        start: FloatArray,
        end: FloatArray,
        hours: FloatArray,
        starts: FloatArray,
        base: float,
    ) -> Timeline:
        """Sort records by (target, end) and prepare the running totals."""
        key = np.asarray(key, dtype=np.int64)
        order = np.lexsort((end, key))
        key, start, end = key[order], start[order], end[order]
        hours = hours[order]
        starts = np.nan_to_num(starts[order], nan=0.0)
        keys, lo, counts = np.unique(key, return_index=True, return_counts=True)
        rank = np.repeat(np.arange(keys.size), counts)
        return cls(
            keys=keys.astype(np.int64),
            lo=lo.astype(np.int64),
            hi=(lo + counts).astype(np.int64),
            start=start,
            end=end,
            hours=hours,
            starts=starts,
            cum_hours=np.concatenate(([0.0], np.cumsum(hours))),
            cum_starts=np.concatenate(([0.0], np.cumsum(starts))),
            comp_end=np.asarray(
                rank * _SPAN + np.clip(end - base, 0.0, _SPAN - 1.0), dtype=np.float64
            ),
            base=base,
        )

    def rank_of(self, key: IntArray) -> tuple[IntArray, NDArray[np.bool_]]:
        """Index of each key among the timeline's targets, and whether it has records."""
        key = np.asarray(key, dtype=np.int64)
        if self.keys.size == 0:
            return np.zeros(key.shape, dtype=np.int64), np.zeros(key.shape, dtype=bool)
        r = np.searchsorted(self.keys, key)
        r = np.minimum(r, self.keys.size - 1)
        return r.astype(np.int64), self.keys[r] == key

    def first_last(self, key: IntArray) -> tuple[FloatArray, FloatArray]:
        """First record start F and last record end E per key (NaN without records)."""
        r, has = self.rank_of(key)
        if self.keys.size == 0:
            nan = np.full(np.shape(key), np.nan)
            return nan, nan.copy()
        first = np.where(has, self.start[self.lo[r]], np.nan)
        last = np.where(has, self.end[self.hi[r] - 1], np.nan)
        return first, last

    def metered(self, key: IntArray, t: FloatArray) -> tuple[FloatArray, FloatArray]:
        """Recorded hours and starts of each key up to time t (prorated inside a record)."""
        t = np.asarray(t, dtype=np.float64)
        r, has = self.rank_of(key)
        if self.keys.size == 0:
            z = np.zeros(t.shape)
            return z, z.copy()
        q = r * _SPAN + np.clip(t - self.base, 0.0, _SPAN - 1.0)
        i = np.searchsorted(self.comp_end, q, side="right")
        lo, hi = self.lo[r], self.hi[r]
        i = np.clip(i, lo, hi)
        h = self.cum_hours[i] - self.cum_hours[lo]
        s = self.cum_starts[i] - self.cum_starts[lo]
        inside = i < hi
        j = np.minimum(i, self.end.size - 1)
        dur = self.end[j] - self.start[j]
        with np.errstate(divide="ignore", invalid="ignore"):
            frac = np.where(dur > 0, np.clip((t - self.start[j]) / dur, 0.0, 1.0), 0.0)
        frac = np.where(inside, frac, 0.0)
        h = h + frac * self.hours[j]
        s = s + frac * self.starts[j]
        return np.where(has, h, 0.0), np.where(has, s, 0.0)


@dataclass(frozen=True)
class Clock:
    """Burn-hour and start clocks B(t) for positions: records plus schedule outside them."""

    timeline: Timeline
    key: IntArray  # target key per query row
    rate_h: FloatArray  # schedule burn hours per calendar hour
    rate_starts: FloatArray  # schedule starts per calendar hour
    first: FloatArray  # first record start (NaN without records)
    last: FloatArray  # last record end (NaN without records)

    @classmethod
    def for_keys(
        cls, timeline: Timeline, key: IntArray, rate_h: FloatArray, rate_starts: FloatArray
    ) -> Clock:
        """A clock per query row (one row per position or per group of positions)."""
        first, last = timeline.first_last(key)
        return cls(timeline, np.asarray(key, dtype=np.int64), rate_h, rate_starts, first, last)

    def at(self, t: FloatArray, rows: IntArray | None = None) -> tuple[FloatArray, FloatArray]:
        """(burn hours, starts) on each row's clock at epoch seconds t (differences matter)."""
        sel = slice(None) if rows is None else rows
        key, first, last = self.key[sel], self.first[sel], self.last[sel]
        rate_h, rate_s = self.rate_h[sel], self.rate_starts[sel]
        t = np.asarray(t, dtype=np.float64)
        base = self.timeline.base
        has = ~np.isnan(first)
        # Schedule time: everything for unmetered targets; before F and after E otherwise.
        before = np.where(has, np.minimum(t, np.nan_to_num(first)), t) - base
        after = np.where(has, np.maximum(t - np.nan_to_num(last), 0.0), 0.0)
        sched_s = np.maximum(before, 0.0) + after  # seconds on schedule
        h, s = self.timeline.metered(key, t)
        return h + rate_h * sched_s / 3600.0, s + rate_s * sched_s / 3600.0
