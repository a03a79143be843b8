"""Maintained light in plans: the light floor with luminaire dirt, cleaning costs, cleaning-only.

Maintained light after t burn hours of a group cycle (reliability/dirt.maintained_light, the
one definition the forecasts use too) = lamp lumen depreciation at t x the luminaire
maintenance factor (CIE 97:2005 table, reliability/dirt.py) at the calendar time since the
last cleaning x the voltage light factor at the operating voltage. Burn hours become
calendar years with the area's weekly burn hours (none: no dirt builds in the plan). A
group relamp that includes cleaning restarts the dirt with the lamps; scheduled cleanings
every cleaning interval restart it in between (DirtRegime.factor_after_relamp).

Cleaning labour per position of a group visit that includes cleaning = cleaning minutes
per fixture / 60 x labour rate x fixtures / positions of the area (added to c_group).

Energy view (planning/energy.py): the cost per megalumen-hour counts the same dirt, through
luminaire_factor_in_cycle under group relamping and spot_only_luminaire_factor under spot
replacement alone.

Cleaning-only option: a visit at mid-interval that cleans every luminaire without
relamping. Its light gain per position is LLD(T/2) x VLF x (1 - LMF(T/2)) (the dirt taken
away); its cost is the cleaning labour of all the area's fixtures plus one equipment hire.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from functools import lru_cache

import numpy as np
from numpy.typing import NDArray

from service.catalogue.lamp_model import LampModel
from service.reliability.dirt import DirtRegime, luminaire_maintenance_factor, maintained_light
from service.reliability.weibull import Weibull

FloatArray = NDArray[np.float64]
WEEKS_PER_YEAR = 365.25 / 7.0
_LN2 = math.log(2.0)
_GRID = 4001


def regime_of(area: object) -> DirtRegime:
    """An area's dirt regime from its stored fields."""
    months = getattr(area, "cleaning_interval_months", None)
    return DirtRegime(
        str(getattr(area, "luminaire_type", "enclosed")),
        str(getattr(area, "dirt_environment", "clean")),
        None if months is None else float(months) / 12.0,
        bool(getattr(area, "relamp_includes_cleaning", False)),
    )


def cleaning_labour_per_position(
    minutes_per_fixture: float, labour_rate_per_h: float, fixtures: int, positions: int
) -> float:
    """Cleaning labour of one group visit, shared per lamp position (currency)."""
    return minutes_per_fixture / 60.0 * labour_rate_per_h * fixtures / max(positions, 1)


def _years(t_h: FloatArray, weekly_h: float) -> FloatArray:
    """Calendar years for burn hours at the weekly rate (0 burn hours a week: no time)."""
    return t_h / (weekly_h * WEEKS_PER_YEAR) if weekly_h > 0 else np.zeros_like(t_h)


def maintained_in_cycle(
    model: LampModel,
    life: Weibull,
    t_h: FloatArray,
    light_factor: float,
    dirt: DirtRegime | None,
    weekly_h: float,
) -> FloatArray:
    """Maintained light t burn hours after a group relamp (fraction of rated initial light)."""
    life_h = life.scale * _LN2 ** (1.0 / life.shape)  # effective B50, for rated-life curves
    lld = model.lumen_curve.at(t_h, life_h if model.lumen_curve.basis != "hours" else None)
    return maintained_light(lld, light_factor, luminaire_factor_in_cycle(dirt, t_h, weekly_h))


def luminaire_factor_in_cycle(
    dirt: DirtRegime | None, t_h: FloatArray, weekly_h: float
) -> FloatArray:
    """Luminaire maintenance factor t burn hours after a group visit (1 for clean luminaires)."""
    if dirt is None:
        return np.ones_like(np.asarray(t_h, dtype=np.float64))
    return dirt.factor_after_relamp(_years(np.asarray(t_h, dtype=np.float64), weekly_h))


@lru_cache(maxsize=256)  # pure in its two hashable arguments; alike areas ask it again
def spot_only_luminaire_factor(dirt: DirtRegime | None, weekly_h: float) -> float:
    """Long-run mean luminaire factor without group visits (spot replacement only).

    With a cleaning schedule: the time average of the LMF over one cleaning interval. Without
    one, or without burn hours to turn into calendar time: ASSUMPTION, the same point the
    regime takes when a visit does not clean (the table's end, 3 years, or no dirt at all).
    """
    if dirt is None or weekly_h <= 0:
        return 1.0
    regime = DirtRegime(dirt.luminaire_type, dirt.environment, dirt.cleaning_interval_years, False)
    if dirt.cleaning_interval_years is None:
        return float(regime.factor_after_relamp(np.zeros(1))[0])
    years = np.linspace(0.0, dirt.cleaning_interval_years, _GRID)
    lmf = luminaire_maintenance_factor(dirt.luminaire_type, dirt.environment, years)
    return float(np.trapezoid(lmf, years) / dirt.cleaning_interval_years)


def first_below(t: FloatArray, light: FloatArray, floor: float) -> float:
    """First t where light reaches the floor, linearly interpolated (inf if never)."""
    below = np.nonzero(light <= floor)[0]
    if below.size == 0:
        return math.inf
    k = int(below[0])
    if k == 0:
        return float(t[1])
    f0, f1 = float(light[k - 1]), float(light[k])
    x = (f0 - floor) / (f0 - f1) if f0 != f1 else 1.0
    return float(t[k - 1] + x * (t[k] - t[k - 1]))


def floor_hours(
    model: LampModel,
    life: Weibull,
    floor: float,
    horizon_h: float,
    light_factor: float = 1.0,
    dirt: DirtRegime | None = None,
    weekly_h: float = 0.0,
) -> float:
    """Burn hours at which maintained light first falls to the floor (inf if never)."""
    t = np.linspace(0.0, horizon_h, _GRID)
    return first_below(t, maintained_in_cycle(model, life, t, light_factor, dirt, weekly_h), floor)


@dataclass(frozen=True, kw_only=True)
class FloorCase:
    """One group's light-floor question (floor_hours' arguments but the model)."""

    life: Weibull
    floor: float
    horizon_h: float
    light_factor: float
    dirt: DirtRegime | None
    weekly_h: float


def floor_hours_many(model: LampModel, cases: list[FloorCase]) -> list[float]:
    """floor_hours for many groups of one lamp model: one lumen-curve read for all of them
    and one dirt read per regime, element by element the same numbers.

    Alike cases (equal life, floor, horizon, light factor, dirt and weekly hours: all that
    floor_hours reads) are computed once.
    """
    if not cases:
        return []
    seen: dict[FloorCase, int] = {}
    rows = [seen.setdefault(c, len(seen)) for c in cases]
    if len(seen) < len(cases):
        found = _floor_hours_distinct(model, list(seen))
        return [found[r] for r in rows]
    return _floor_hours_distinct(model, cases)


def _floor_hours_distinct(model: LampModel, cases: list[FloorCase]) -> list[float]:
    """floor_hours_many's computation, one row per case."""
    t = np.stack([np.linspace(0.0, c.horizon_h, _GRID) for c in cases])
    rated = model.lumen_curve.basis != "hours"
    life_h = np.array([c.life.scale * _LN2 ** (1.0 / c.life.shape) for c in cases])
    lld = model.lumen_curve.at(t, life_h[:, None] if rated else None)
    lmf = np.ones_like(t)
    by_regime: dict[DirtRegime, list[int]] = {}
    for i, c in enumerate(cases):
        if c.dirt is not None:
            by_regime.setdefault(c.dirt, []).append(i)
    for regime, idx in by_regime.items():
        weekly = np.array([cases[i].weekly_h for i in idx])
        years = np.where(
            (weekly > 0)[:, None],
            t[idx] / (np.where(weekly > 0, weekly, 1.0) * WEEKS_PER_YEAR)[:, None],
            0.0,
        )
        lmf[idx] = regime.factor_after_relamp(years)
    light = maintained_light(lld, np.array([c.light_factor for c in cases])[:, None], lmf)
    return [first_below(t[i], light[i], c.floor) for i, c in enumerate(cases)]


@dataclass(frozen=True)
class CleaningOnly:
    """A cleaning visit without relamping at mid-interval: light before, after, gain, cost."""

    at_h: float  # burn hours into the group cycle
    light_before: float  # maintained light per position, fraction of rated initial
    light_after: float
    light_gain: float
    cost_per_visit: float  # currency: cleaning labour of all fixtures + one equipment hire
    cost_per_position: float


def cleaning_only(
    model: LampModel,
    life: Weibull,
    interval_h: float,
    light_factor: float,
    dirt: DirtRegime,
    weekly_h: float,
    visit_cost: float,
    positions: int,
) -> CleaningOnly:
    """Light gained and cost of one cleaning-only visit half-way through the group interval."""
    mid = np.array([0.5 * interval_h])
    before = float(maintained_in_cycle(model, life, mid, light_factor, dirt, weekly_h)[0])
    after = float(maintained_in_cycle(model, life, mid, light_factor, None, weekly_h)[0])
    return CleaningOnly(
        float(mid[0]), before, after, after - before, visit_cost, visit_cost / max(positions, 1)
    )


def fixtures_by_area(area_id: NDArray[np.int64], fixture_id: NDArray[np.int64]) -> dict[int, int]:
    """Number of distinct fixtures per area among the positions."""
    if area_id.size == 0:
        return {}
    # One int64 key per (area, fixture): ids are below 2**31 (service.api.ids), and a 1-D
    # unique is far quicker than np.unique(axis=0) on the pairs.
    keys = np.unique(area_id.astype(np.int64) * 2**31 + fixture_id.astype(np.int64))
    areas, counts = np.unique(keys // 2**31, return_counts=True)
    return dict(zip(areas.tolist(), counts.tolist(), strict=True))
