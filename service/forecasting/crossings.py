"""When each area crosses its light floor and its burnout ceiling: one bisection for both.

Per area (group of positions): the light metric is the mean maintained light of its lamps
tau burn hours ahead (burnouts spot-replaced: a dark position is a new lamp now), crossed
below Area.light_floor; the burnout metric is the share of positions whose lamp has burned
out by then if none were replaced, 1 - mean S(age + tau), crossed at or above
Area.burnout_ceiling. Each is searched by bisection in burn hours over the look-ahead span
(CROSSING_YEARS at the area's burn rate): 0 when crossed now, NaN when not crossed by the
span's end or without a limit.

Only the areas whose answer is still open (a limit, not crossed now, crossed by the end)
are bisected, and each metric is evaluated on those areas' positions alone, with their
arrays gathered once. An area's metric reads its own positions only, summed in the same
order (np.bincount adds in input order), so every date is the one the full pass gives.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import TYPE_CHECKING

import numpy as np
from numpy.typing import NDArray

from service.catalogue.resolved import TypeTable
from service.reliability.dirt import maintained_light

if TYPE_CHECKING:
    from service.forecasting.service import PositionForecast

FloatArray = NDArray[np.float64]
IntArray = NDArray[np.int64]
BoolArray = NDArray[np.bool_]

CROSSING_YEARS = 10.0  # look this far ahead for floor and ceiling crossings
BISECT = 40  # halvings of the look-ahead span (its 2^-40 th: well below a second)
WEEKS_PER_YEAR = 52.18


def positions_by_row(type_row: IntArray) -> list[tuple[int, IntArray]]:
    """(type row, positions of that row) pairs: one sort instead of a scan per row per step."""
    order = np.argsort(type_row, kind="stable")
    rows, starts = np.unique(type_row[order], return_index=True)
    bounds = [*starts.tolist(), int(type_row.size)]
    return [(int(r), order[bounds[i] : bounds[i + 1]]) for i, r in enumerate(rows.tolist())]


@dataclass(frozen=True)
class _Part:
    """The positions of some areas (ascending) and what a metric reads of them, gathered."""

    kind: str  # "light" or "burnout"
    idx: IntArray
    group: IntArray
    dark: BoolArray
    age_h: FloatArray  # 0 where dark (a new lamp now)
    worn_h: FloatArray  # effective age: filament curves follow the life used (exposure)
    scale_h: FloatArray
    beta: FloatArray
    life_h: FloatArray
    light_factor: FloatArray
    by_row: list[tuple[int, IntArray]]  # (type row, entries of this part)


def _part(
    pf: PositionForecast, types: TypeTable, group: IntArray, keep: BoolArray, kind: str
) -> _Part:
    """The positions of the kept areas, in position order, and their arrays."""
    idx = np.nonzero(keep[group])[0]
    dark = pf.ages.burned_out[idx]
    return _Part(
        kind=kind,
        idx=idx,
        group=group[idx],
        dark=dark,
        age_h=np.where(dark, 0.0, pf.ages.age_h[idx]),
        worn_h=pf.fleet.effective_age_h[idx],
        scale_h=pf.fleet.scale_h[idx],
        beta=types.table.shape[pf.type_row[idx]],
        life_h=pf.fleet.life_h[idx],
        light_factor=pf.fleet.light_factor[idx],
        by_row=positions_by_row(pf.type_row[idx]) if kind == "light" else [],
    )


def _values(pf: PositionForecast, types: TypeTable, part: _Part, tau_g: FloatArray) -> FloatArray:
    """Each position's light, or 1 where burned out by tau ahead (F(age + tau)), none replaced."""
    tau = tau_g[part.group]
    if part.kind == "burnout":
        f = -np.expm1(-np.power((part.worn_h + tau) / part.scale_h, part.beta))
        out: FloatArray = np.where(part.dark, 1.0, f)
        return out
    age = part.age_h + tau
    worn = part.worn_h + tau
    lld = np.empty(age.size)
    for j, rows in part.by_row:
        curve = types.table.lumen_curves[j]
        if curve.basis == "rated_life_fraction":
            lld[rows] = curve.at(worn[rows], part.life_h[rows])
        else:
            lld[rows] = curve.at(age[rows], None)
    return maintained_light(lld, part.light_factor, pf.dirt.factor_by_area(tau_g, part.idx))


@dataclass
class _Search:
    """One kind's bisection state over the areas."""

    kind: str
    limit: FloatArray
    hi: FloatArray
    valid: BoolArray
    now: BoolArray
    end: BoolArray
    lo: FloatArray
    top: FloatArray
    part: _Part | None  # the open areas' positions (None: nothing to bisect)

    def crossed(self, v: FloatArray) -> BoolArray:
        """Below the floor (light) or at or above the ceiling (burnout)."""
        out: BoolArray = v < self.limit if self.kind == "light" else v >= self.limit
        return out

    def result(self) -> FloatArray:
        """Burn hours ahead of each crossing: 0 crossed now, NaN none or no limit."""
        out = np.where(self.now, 0.0, np.where(self.end, self.top, np.nan))
        return np.where(self.valid, out, np.nan)


def _start(
    pf: PositionForecast,
    types: TypeTable,
    group: IntArray,
    counts: FloatArray,
    limit: FloatArray,
    hi: FloatArray,
    kind: str,
) -> _Search:
    n_g = counts.size
    valid = ~np.isnan(limit) & (hi > 0)
    none = np.zeros(n_g, dtype=bool)
    s = _Search(kind, limit, hi, valid, none, none, np.zeros(n_g), hi.copy(), None)
    if not valid.any():
        return s
    part = _part(pf, types, group, valid, kind)

    def metric(tau_g: FloatArray) -> FloatArray:
        v = np.bincount(part.group, weights=_values(pf, types, part, tau_g), minlength=n_g)
        out: FloatArray = v / counts
        return out

    s.now = s.crossed(metric(np.zeros(n_g))) & valid
    s.end = s.crossed(metric(hi)) & valid
    open_ = valid & ~s.now & s.end
    if open_.any():
        s.part = _part(pf, types, group, open_, kind) if not open_[valid].all() else part
    return s


def crossings(
    pf: PositionForecast,
    types: TypeTable,
    group: IntArray,
    floor: FloatArray,
    ceiling: FloatArray,
    rate_week: FloatArray,
) -> tuple[FloatArray, FloatArray]:
    """Burn hours ahead at which each area crosses its light floor and its burnout ceiling."""
    n_g = floor.size
    counts = np.maximum(np.bincount(group, minlength=n_g), 1)
    hi = rate_week * WEEKS_PER_YEAR * CROSSING_YEARS  # burn hours in the look-ahead span
    searches = [
        _start(pf, types, group, counts, floor, hi, "light"),
        _start(pf, types, group, counts, ceiling, hi, "burnout"),
    ]
    live = [s for s in searches if s.part is not None]
    for _ in range(BISECT if live else 0):
        for s in live:
            assert s.part is not None
            mid = 0.5 * (s.lo + s.top)
            v = np.bincount(s.part.group, weights=_values(pf, types, s.part, mid), minlength=n_g)
            c = s.crossed(v / counts)
            s.top = np.where(c, mid, s.top)
            s.lo = np.where(c, s.lo, mid)
    return searches[0].result(), searches[1].result()
