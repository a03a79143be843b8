"""Each position's luminaire dirt for forecasts: its area's CIE 97 regime, per position.

Luminaire maintenance factor (reliability/dirt.py, CIE 97:2005 table) at the time since
the area's luminaires were last cleaned, in calendar years: burn hours ahead become years
with the area's burn rate (0 burn hours a week: no time passes for the forecast). The
cleaning schedule repeats every cleaning_interval_months from the last cleaning (none: the
dirt keeps building). Spot replacements do not clean the luminaire.

When the area has no last_cleaned_at, ASSUMPTION: half a cleaning interval ago (the cycle's
mean phase); with no cleaning schedule either, when the position's lamp went in (its age in
calendar years at the area's burn rate).
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass
from datetime import datetime
from functools import cached_property

import numpy as np
from numpy.typing import NDArray
from sqlalchemy import select
from sqlalchemy.orm import Session

from service.readings.ages import PositionAges
from service.register.models import Area
from service.reliability.dirt import lmf_columns, lmf_interp, years_since_cleaning

FloatArray = NDArray[np.float64]
IntArray = NDArray[np.int64]

WEEKS_PER_YEAR = 365.25 / 7.0
_S_PER_YEAR = 365.25 * 86400.0


@dataclass(frozen=True, eq=False)
class PositionDirt:
    """Per-position dirt inputs: area table columns, years since cleaning, interval, years/h."""

    columns: FloatArray  # (areas, 6) LMF at the table's years, per area
    area_row: IntArray  # each position's row in columns
    cleaned_ago_y: FloatArray  # years since the position's luminaire was cleaned, now
    interval_y: FloatArray  # years between cleanings (NaN: none scheduled)
    years_per_burn_h: FloatArray  # calendar years per burn hour at the area's rate (0: none)

    def factor(self, hours_ahead: FloatArray | float) -> FloatArray:
        """Each position's luminaire maintenance factor `hours_ahead` burn hours from now."""
        t = self.cleaned_ago_y + np.asarray(hours_ahead, dtype=np.float64) * self.years_per_burn_h
        return lmf_interp(self.columns, years_since_cleaning(t, self.interval_y), self.area_row)

    def factor_by_area(
        self, hours_ahead_by_area: FloatArray, rows: IntArray | None = None
    ) -> FloatArray:
        """Per position (of `rows` only, if given), with hours ahead given per area row
        (computed once per area if it can)."""
        area_row = self.area_row if rows is None else self.area_row[rows]
        per_area = self._per_area
        if per_area is None:
            if rows is None:
                return self.factor(hours_ahead_by_area[self.area_row])
            h = np.asarray(hours_ahead_by_area, dtype=np.float64)[area_row]
            t = self.cleaned_ago_y[rows] + h * self.years_per_burn_h[rows]
            return lmf_interp(
                self.columns, years_since_cleaning(t, self.interval_y[rows]), area_row
            )
        ago, interval, y_per_h = per_area
        t = ago + hours_ahead_by_area * y_per_h
        all_rows = np.arange(self.columns.shape[0])
        lmf = lmf_interp(self.columns, years_since_cleaning(t, interval), all_rows)
        return lmf[area_row]

    @cached_property
    def _per_area(self) -> tuple[FloatArray, FloatArray, FloatArray] | None:
        """(years since cleaning, interval, years per burn hour) per area, if uniform in each."""
        n_g = self.columns.shape[0]
        if self.area_row.size == 0:
            return None
        first = np.full(n_g, -1, dtype=np.int64)
        first[self.area_row[::-1]] = np.arange(self.area_row.size)[::-1]
        if np.any(first < 0):
            return None
        out = []
        for arr in (self.cleaned_ago_y, self.interval_y, self.years_per_burn_h):
            area_val = arr[first]
            same = np.isclose(arr, area_val[self.area_row], equal_nan=True, rtol=0, atol=0)
            if not bool(same.all()):
                return None
            out.append(area_val)
        return out[0], out[1], out[2]


def no_dirt(n: int) -> PositionDirt:
    """Clean luminaires throughout (LMF 1): positions of no known area."""
    return PositionDirt(
        np.ones((1, 6)), np.zeros(n, np.int64), np.zeros(n), np.full(n, np.nan), np.zeros(n)
    )


def position_dirt(session: Session, ages: PositionAges, at: datetime) -> PositionDirt:
    """Dirt inputs for every position, from its area's luminaire type, environment, cleaning."""
    n = ages.size
    area_ids, group = np.unique(ages.area_id, return_inverse=True)
    if n == 0:
        return no_dirt(0)
    rows = session.execute(
        select(
            Area.id,
            Area.luminaire_type,
            Area.dirt_environment,
            Area.cleaning_interval_months,
            Area.last_cleaned_at,
        ).where(Area.id.in_(area_ids.tolist()))
    ).all()
    info = {int(r[0]): r for r in rows}
    ordered = [info[int(a)] for a in area_ids.tolist()]
    cols = lmf_columns([str(r[1]) for r in ordered], [str(r[2]) for r in ordered])
    interval = np.array(
        [np.nan if r[3] is None else float(r[3]) / 12.0 for r in ordered], dtype=np.float64
    )
    group = np.asarray(group).ravel()
    y_per_h = _years_per_burn_hour(ages.burn_h_per_week)
    cleaned = _cleaned_ago(ordered, interval, group, ages.age_h * y_per_h, at)
    return PositionDirt(cols, group, cleaned, interval[group], y_per_h)


def _years_per_burn_hour(rate_h_per_week: FloatArray) -> FloatArray:
    rate = np.nan_to_num(np.asarray(rate_h_per_week, dtype=np.float64))
    return np.where(rate > 0, 1.0 / (np.where(rate > 0, rate, 1.0) * WEEKS_PER_YEAR), 0.0)


def _cleaned_ago(
    ordered: Sequence[object],
    interval_y: FloatArray,
    group: IntArray,
    age_y: FloatArray,
    at: datetime,
) -> FloatArray:
    """Years since each position's luminaire was cleaned: stored date, half an interval, age."""
    out = np.where(np.isnan(interval_y), np.nan, 0.5 * interval_y)
    for g, row in enumerate(ordered):
        last = row[4]  # type: ignore[index]
        if last is not None:
            out[g] = max((at - last).total_seconds(), 0.0) / _S_PER_YEAR
    per_position = out[group]
    return np.where(np.isnan(per_position), age_y, per_position)
