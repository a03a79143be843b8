"""Group age of an area never relamped through the service, from its lamps' installation dates.

Rule (stated; the thresholds are common practice for reading a register, not a standard):
when at least CLUSTER_SHARE (80 %) of an area's positions, and at least CLUSTER_MIN positions,
had their lamps put in within CLUSTER_WINDOW_DAYS (14 days) of one another, those lamps went
in at one group relamp before the service kept records. The group age of each lamp type is
then the median burn hours of its positions installed inside that window (the lamps spot
replaced since are younger and would pull a mean down); a lamp type with no position inside
the window falls back to its positions' mean age. Without such a cluster the area's group
age is its positions' mean age, as before.

Pure numpy: planning.service hands in per-position arrays and uses the answer.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray

FloatArray = NDArray[np.float64]
IntArray = NDArray[np.int64]

CLUSTER_SHARE = 0.8  # share of an area's positions inside the window [practice]
CLUSTER_WINDOW_DAYS = 14.0  # days between the first and last install of the cluster [practice]
CLUSTER_MIN = 4  # fewer positions than this say nothing about a past group relamp
_DAY_S = 86_400.0


def densest_window(times_s: FloatArray, window_s: float) -> tuple[int, float]:
    """Most times inside any closed window of window_s seconds, and where that window starts."""
    t = np.sort(np.asarray(times_s, dtype=np.float64))
    if t.size == 0:
        return 0, float("nan")
    ends = np.searchsorted(t, t + window_s, side="right")  # first index past each window
    counts = ends - np.arange(t.size)
    best = int(np.argmax(counts))
    return int(counts[best]), float(t[best])


@dataclass(frozen=True)
class Cluster:
    """An area's installation cluster: the window and the positions inside it."""

    start_s: float  # epoch seconds
    end_s: float
    inside: NDArray[np.bool_]  # per position of the area


def installation_cluster(
    installed_s: FloatArray,
    *,
    share: float = CLUSTER_SHARE,
    window_days: float = CLUSTER_WINDOW_DAYS,
    min_positions: int = CLUSTER_MIN,
) -> Cluster | None:
    """The cluster of one area's installation dates (epoch seconds), or None if they spread."""
    t = np.asarray(installed_s, dtype=np.float64)
    ok = np.isfinite(t)
    n = int(t.size)
    if n < min_positions:
        return None
    window = window_days * _DAY_S
    count, start = densest_window(t[ok], window)
    if count < min_positions or count < share * n:
        return None
    inside = ok & (t >= start) & (t <= start + window)
    return Cluster(start, start + window, inside)


def group_ages(
    area_of: IntArray,
    group_of: IntArray,
    installed_s: FloatArray,
    age_h: FloatArray,
    n_groups: int,
) -> FloatArray:
    """Per group: the age from its area's installation cluster, burn hours (NaN: none).

    area_of, group_of, installed_s, age_h: per position (group_of indexes 0..n_groups-1, each
    group inside one area).
    """
    out = np.full(n_groups, np.nan)
    if installed_s.size != area_of.size:  # no installation dates handed in
        return out
    order = np.argsort(area_of, kind="stable")
    cuts = np.nonzero(np.diff(area_of[order]))[0] + 1
    inside = np.zeros(area_of.size, dtype=bool)
    for idx in np.split(order, cuts) if order.size else []:  # positions of one area at a time
        cl = installation_cluster(installed_s[idx])
        if cl is not None:
            inside[idx[cl.inside]] = True
    members = np.nonzero(inside)[0]
    if members.size == 0:
        return out
    # Every group's median at once: members sorted by (group, age), the middle one (or the
    # mean of the middle two) of each group's run, as np.median takes it.
    g, a = group_of[members], age_h[members]
    by = np.lexsort((a, g))
    g, a = g[by], a[by]
    groups, first, count = np.unique(g, return_index=True, return_counts=True)
    out[groups] = (a[first + (count - 1) // 2] + a[first + count // 2]) / 2.0
    return out
