"""Luminaire dirt depreciation against the CIE 97:2005 luminaire maintenance factor table.

Reference: CIE 97:2005, *Guide on the maintenance of indoor electric lighting systems*, the
luminaire maintenance factor (LMF) table by luminaire type A-F, environment and years
between cleanings. The rows below are RECALLED FROM MEMORY of that table (written out here
apart from the module's own data) and are checked at the tabulated points.
"""

from __future__ import annotations

import numpy as np
import pytest

from service.reliability.dirt import (
    ENVIRONMENTS,
    LMF_TABLE,
    DirtRegime,
    beyond_table,
    lmf_columns,
    lmf_interp,
    luminaire_maintenance_factor,
    maintained_light,
    years_since_cleaning,
)

YEARS = [0.5, 1.0, 1.5, 2.0, 2.5, 3.0]
# (type, environment) -> LMF at YEARS. CIE 97:2005 table, recalled from memory.
CIE_97 = {
    ("bare_lamp", "normal"): [0.93, 0.89, 0.86, 0.83, 0.80, 0.77],
    ("open_top_reflector", "clean"): [0.95, 0.91, 0.89, 0.87, 0.85, 0.84],
    ("closed_top_reflector", "dirty"): [0.84, 0.74, 0.68, 0.63, 0.59, 0.56],
    ("enclosed", "normal"): [0.89, 0.80, 0.74, 0.69, 0.65, 0.62],
    ("enclosed", "clean"): [0.93, 0.87, 0.83, 0.79, 0.75, 0.73],
    ("dustproof", "dirty"): [0.91, 0.86, 0.83, 0.81, 0.80, 0.79],
    ("indirect_uplighter", "very_clean"): [0.92, 0.86, 0.81, 0.77, 0.74, 0.71],
}


@pytest.mark.parametrize(("key", "row"), list(CIE_97.items()))
def test_tabulated_points_are_the_cie_97_table(key: tuple[str, str], row: list[float]) -> None:
    got = luminaire_maintenance_factor(key[0], key[1], YEARS)
    assert got == pytest.approx(row, abs=1e-12)


def test_between_points_linear_from_one_when_just_cleaned() -> None:
    # Linear interpolation between CIE 97 points; 1 at the moment of cleaning (by definition).
    got = luminaire_maintenance_factor("enclosed", "normal", [0.0, 0.25, 0.75, 2.25])
    assert got == pytest.approx([1.0, 1 - 0.11 / 2, (0.89 + 0.80) / 2, (0.69 + 0.65) / 2])


def test_the_table_is_monotone_and_orders_environments() -> None:
    for cols in LMF_TABLE.values():
        assert np.all(np.diff(cols, axis=0) <= 0)  # dirt only builds between cleanings
        assert np.all(np.diff(cols, axis=1) <= 0)  # dirtier rooms, lower factors
    assert len(ENVIRONMENTS) == 4


def test_past_the_table_it_extrapolates_flagged_and_bounded() -> None:
    t = np.array([3.0, 3.5, 50.0])
    got = luminaire_maintenance_factor("enclosed", "dirty", t)
    assert got[1] == pytest.approx(0.52 - 0.03)  # the last segment (0.55 to 0.52) continues
    assert got[2] == pytest.approx(0.3)  # never below the floor
    assert beyond_table(t).tolist() == [False, True, True]


def test_cleaning_schedule_is_a_sawtooth_and_relamps_restart_it() -> None:
    assert years_since_cleaning([0.4, 1.4, 2.9], 1.0) == pytest.approx([0.4, 0.4, 0.9])
    assert years_since_cleaning([0.4, 1.4], None) == pytest.approx([0.4, 1.4])
    cleaned = DirtRegime("enclosed", "normal", 1.0, True)
    assert cleaned.factor_after_relamp([0.5, 1.5]) == pytest.approx([0.89, 0.89])
    # A relamp that does not clean: the worst point of the yearly schedule (assumption).
    not_cleaned = DirtRegime("enclosed", "normal", 1.0, False)
    assert not_cleaned.factor_after_relamp([0.1, 0.9]) == pytest.approx([0.80, 0.80])
    never = DirtRegime("enclosed", "normal", None, True)
    assert never.factor_after_relamp([2.0]) == pytest.approx([0.69])
    assert cleaned.factor_from(0.5, [0.0, 0.75]) == pytest.approx([0.89, 1 - 0.11 / 2])


def test_rows_of_columns_match_the_single_lookup() -> None:
    cols = lmf_columns(["enclosed", "dustproof"], ["clean", "dirty"])
    got = lmf_interp(cols, np.array([1.0, 2.0]))
    assert got == pytest.approx([0.87, 0.81])


def test_maintained_light_is_the_product() -> None:
    # CIE 97:2005 maintenance factor method: lamp lumen maintenance x luminaire maintenance,
    # here with the voltage light factor (filament light ~ V^3.4, common practice).
    lld, lmf, vlf = np.array([0.9, 0.8]), np.array([0.87, 0.8]), 0.95**3.4
    assert maintained_light(lld, vlf, lmf) == pytest.approx(lld * lmf * vlf)
    with pytest.raises(ValueError):
        luminaire_maintenance_factor("enclosed", "muddy", 1.0)
    with pytest.raises(ValueError):
        luminaire_maintenance_factor("enclosed", "clean", -1.0)


def test_per_area_shortcut_equals_the_per_position_factor() -> None:
    from service.forecasting.dirt import PositionDirt  # the forecast's per-position view

    cols = lmf_columns(["enclosed", "dustproof"], ["clean", "dirty"])
    rows = np.array([0, 1, 1, 0, 1])
    per_area = PositionDirt(
        cols,
        rows,
        np.array([0.5, 0.2, 0.2, 0.5, 0.2]),
        np.array([1.0, np.nan, np.nan, 1.0, np.nan]),
        np.full(5, 1.0 / 3000.0),
    )
    hours = np.array([1200.0, 4000.0])
    assert per_area.factor_by_area(hours) == pytest.approx(per_area.factor(hours[rows]))
    mixed = PositionDirt(
        cols, rows, np.array([0.5, 0.2, 0.9, 0.5, 0.2]), np.full(5, np.nan), np.full(5, 1e-4)
    )
    assert mixed.factor_by_area(hours) == pytest.approx(mixed.factor(hours[rows]))
