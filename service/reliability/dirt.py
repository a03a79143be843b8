"""Luminaire dirt depreciation and maintained light (CIE 97:2005 luminaire maintenance factor).

Luminaire maintenance factor (LMF): the luminaire's light output ratio after t years of dirt
since its last cleaning, over its clean value [published: CIE 97:2005, *Guide on the
maintenance of indoor electric lighting systems*, 2nd ed., the LMF table by luminaire type
A-F and environment very clean / clean / normal / dirty, at 0.5-3 years between cleanings].
The table values below are RECALLED FROM MEMORY of that table, not read from the
publication here: they are defaults a user can check against the standard (or the
luminaire maker's own LMF data) and correct.

Between tabulated times the factor is interpolated linearly, from LMF(0) = 1 (just
cleaned). Past 3 years (the table's end) it continues along the last segment's slope,
never below LMF_FLOOR, and `beyond_table` flags it: an extrapolation, not the table.

Periodic cleaning every I years (and at each group relamp when the relamp includes
cleaning) makes the time since cleaning a sawtooth: (t mod I) counted from the last visit.

Maintained light (fraction of the lamp's rated initial light at the luminaire) =
lamp lumen depreciation x luminaire maintenance factor x voltage light factor
[published: CIE 97:2005 maintenance factor method, MF = LLMF x LSF x LMF x RSMF; lamp
survival is carried apart by the survival curves, room surfaces are not modelled]. This is
the one definition forecasts and plans use (maintained_light).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike, NDArray

FloatArray = NDArray[np.float64]

# CIE 97:2005 luminaire types (plain names of our own; the CIE letter beside each).
LUMINAIRE_TYPES: dict[str, str] = {
    "bare_lamp": "A: bare lamp batten",
    "open_top_reflector": "B: open-top reflector (ventilated, self-cleaning)",
    "closed_top_reflector": "C: closed-top reflector (unventilated)",
    "enclosed": "D: enclosed (IP2X)",
    "dustproof": "E: dustproof (IP5X)",
    "indirect_uplighter": "F: indirect uplighter",
}
ENVIRONMENTS: tuple[str, ...] = ("very_clean", "clean", "normal", "dirty")
TABLE_YEARS: FloatArray = np.array([0.5, 1.0, 1.5, 2.0, 2.5, 3.0])  # years between cleanings
LMF_FLOOR = 0.3  # lowest factor an extrapolation past the table may reach (ours)
_XS: FloatArray = np.concatenate(([0.0], TABLE_YEARS))  # years, with the clean point at 0
_STEP_Y = 0.5  # years between the table's columns (and from 0 to the first)
assert np.allclose(np.diff(_XS), _STEP_Y)

# LMF[type][row = TABLE_YEARS, column = ENVIRONMENTS]. RECALLED FROM MEMORY of CIE 97:2005.
LMF_TABLE: dict[str, FloatArray] = {
    "bare_lamp": np.array(
        [
            [0.98, 0.96, 0.93, 0.89],
            [0.97, 0.94, 0.89, 0.84],
            [0.94, 0.91, 0.86, 0.80],
            [0.92, 0.89, 0.83, 0.77],
            [0.90, 0.87, 0.80, 0.74],
            [0.88, 0.85, 0.77, 0.71],
        ]
    ),
    "open_top_reflector": np.array(
        [
            [0.98, 0.95, 0.91, 0.86],
            [0.96, 0.91, 0.87, 0.80],
            [0.95, 0.89, 0.84, 0.76],
            [0.94, 0.87, 0.80, 0.72],
            [0.93, 0.85, 0.78, 0.69],
            [0.92, 0.84, 0.75, 0.67],
        ]
    ),
    "closed_top_reflector": np.array(
        [
            [0.97, 0.94, 0.89, 0.84],
            [0.94, 0.89, 0.81, 0.74],
            [0.91, 0.84, 0.76, 0.68],
            [0.89, 0.80, 0.72, 0.63],
            [0.87, 0.77, 0.68, 0.59],
            [0.85, 0.74, 0.65, 0.56],
        ]
    ),
    "enclosed": np.array(
        [
            [0.96, 0.93, 0.89, 0.83],
            [0.93, 0.87, 0.80, 0.71],
            [0.89, 0.83, 0.74, 0.64],
            [0.86, 0.79, 0.69, 0.59],
            [0.83, 0.75, 0.65, 0.55],
            [0.81, 0.73, 0.62, 0.52],
        ]
    ),
    "dustproof": np.array(
        [
            [0.98, 0.96, 0.93, 0.91],
            [0.96, 0.94, 0.90, 0.86],
            [0.94, 0.92, 0.88, 0.83],
            [0.92, 0.90, 0.86, 0.81],
            [0.91, 0.88, 0.85, 0.80],
            [0.90, 0.86, 0.84, 0.79],
        ]
    ),
    "indirect_uplighter": np.array(
        [
            [0.92, 0.89, 0.85, 0.78],
            [0.86, 0.81, 0.74, 0.65],
            [0.81, 0.75, 0.67, 0.59],
            [0.77, 0.70, 0.62, 0.54],
            [0.74, 0.66, 0.58, 0.49],
            [0.71, 0.62, 0.55, 0.46],
        ]
    ),
}
SOURCE = "CIE 97:2005 luminaire maintenance factor table (values recalled from memory)"


def _column(luminaire_type: str, environment: str) -> FloatArray:
    if luminaire_type not in LMF_TABLE:
        raise ValueError(f"unknown luminaire type {luminaire_type!r}")
    if environment not in ENVIRONMENTS:
        raise ValueError(f"unknown environment {environment!r}")
    return LMF_TABLE[luminaire_type][:, ENVIRONMENTS.index(environment)]


def luminaire_maintenance_factor(
    luminaire_type: str, environment: str, years_since_cleaning: ArrayLike
) -> FloatArray:
    """LMF after t years since cleaning: the table interpolated from 1 at t = 0 (vectorised)."""
    t = np.asarray(years_since_cleaning, dtype=np.float64)
    col = _column(luminaire_type, environment)
    # One table row picked for every t (rows), not the row copied out to t's shape.
    return lmf_interp(col[None, :], t, np.zeros(t.shape, dtype=np.intp))


def lmf_columns(luminaire_types: list[str], environments: list[str]) -> FloatArray:
    """The table column (LMF at TABLE_YEARS) of each (type, environment) pair, shape (n, 6)."""
    return np.array(
        [_column(t, e) for t, e in zip(luminaire_types, environments, strict=True)],
        dtype=np.float64,
    ).reshape(len(luminaire_types), TABLE_YEARS.size)


def lmf_interp(
    columns: ArrayLike, years_since_cleaning: ArrayLike, rows: ArrayLike | None = None
) -> FloatArray:
    """LMF at t, from 1 at t = 0: columns (..., 6) aligned with t, or (m, 6) picked by rows."""
    t = np.asarray(years_since_cleaning, dtype=np.float64)
    if np.any(t < 0) or np.any(~np.isfinite(t)):
        raise ValueError("years since cleaning must be finite and >= 0")
    cols = np.asarray(columns, dtype=np.float64)
    xs = _XS
    ys = np.concatenate((np.ones((*cols.shape[:-1], 1)), cols), axis=-1)
    # The table's years are evenly spaced (0.5 y): the segment is floor(t / step), no search.
    j = np.minimum((t * (1.0 / _STEP_Y)).astype(np.intp), xs.size - 2)
    x0, x1 = xs[j], xs[j + 1]
    if rows is not None:
        r = np.asarray(rows, dtype=np.intp)
        y0, y1 = ys[r, j], ys[r, j + 1]
    else:
        y0 = np.take_along_axis(ys, j[..., None], axis=-1)[..., 0]
        y1 = np.take_along_axis(ys, (j + 1)[..., None], axis=-1)[..., 0]
    # Linear between table points; past the end the last segment's slope continues.
    out = y0 + (y1 - y0) * (t - x0) / (x1 - x0)
    return np.maximum(out, LMF_FLOOR)


def beyond_table(years_since_cleaning: ArrayLike) -> NDArray[np.bool_]:
    """True where the time since cleaning is past the table's last column (extrapolated)."""
    return np.asarray(years_since_cleaning, dtype=np.float64) > TABLE_YEARS[-1]


def years_since_cleaning(
    years_since_visit: ArrayLike, cleaning_interval_years: ArrayLike | None
) -> FloatArray:
    """Time since the last cleaning, t mod I, counted from a visit that cleaned (I NaN: t)."""
    t = np.asarray(years_since_visit, dtype=np.float64)
    i = np.asarray(np.nan if cleaning_interval_years is None else cleaning_interval_years, float)
    if np.any(i <= 0):
        raise ValueError("cleaning interval must be positive years")
    none = np.isnan(i)
    safe = np.where(none, 1.0, i)
    # t mod I as t - I floor(t / I) (t >= 0); no interval leaves t.
    return np.where(none, t, t - safe * np.floor(t / safe))


def maintained_light(
    lamp_lumen_depreciation: ArrayLike,
    voltage_light_factor: ArrayLike,
    luminaire_factor: ArrayLike = 1.0,
) -> FloatArray:
    """Maintained light = LLD x LMF x voltage light factor (fraction of rated initial light)."""
    return (
        np.asarray(lamp_lumen_depreciation, dtype=np.float64)
        * np.asarray(luminaire_factor, dtype=np.float64)
        * np.asarray(voltage_light_factor, dtype=np.float64)
    )


@dataclass(frozen=True)
class DirtRegime:
    """An area's luminaires, environment and cleaning: how dirt builds after a group visit."""

    luminaire_type: str
    environment: str
    cleaning_interval_years: float | None  # None: cleaned only at group relamps (if at all)
    relamp_includes_cleaning: bool

    def factor_after_relamp(self, years_since_relamp: ArrayLike) -> FloatArray:
        """LMF t years after a group relamp, with the scheduled cleanings in between.

        A relamp that cleans starts the sawtooth at 0. One that does not leaves the phase of
        the cleaning schedule unknown: ASSUMPTION, the worst point of it (just before a
        cleaning, t = I), or the table's end (3 years) when there is no cleaning schedule.
        """
        t = np.asarray(years_since_relamp, dtype=np.float64)
        if self.relamp_includes_cleaning:
            since = years_since_cleaning(t, self.cleaning_interval_years)
        else:
            worst = self.cleaning_interval_years or float(TABLE_YEARS[-1])
            since = np.full_like(t, worst)
        return luminaire_maintenance_factor(self.luminaire_type, self.environment, since)

    def factor_from(self, years_since_cleaned_now: float, years_ahead: ArrayLike) -> FloatArray:
        """LMF years_ahead from now when the luminaires were cleaned that long ago."""
        t = years_since_cleaned_now + np.asarray(years_ahead, dtype=np.float64)
        since = years_since_cleaning(t, self.cleaning_interval_years)
        return luminaire_maintenance_factor(self.luminaire_type, self.environment, since)
