"""LumenTable (every curve at once) against each curve's own reading through scipy's PCHIP."""

from __future__ import annotations

import numpy as np
import pytest
from scipy.interpolate import PchipInterpolator

from service.reliability.lumen import LumenCurve, default_lumen_curve, exponential_curve
from service.reliability.lumen_table import LumenTable
from service.reliability.technologies import TECHNOLOGIES


def _curves() -> list[LumenCurve]:
    """Defaults of every technology, plus curves that test each branch of the table."""
    curves = [default_lumen_curve(t) for t in TECHNOLOGIES]
    curves += [
        # knots crowded into one cell (several steps forward), and a cap
        LumenCurve(
            (100.0, 101.0, 102.5, 103.0, 50_000.0),
            (0.99, 0.98, 0.97, 0.96, 0.7),
            "hours",
            False,
            "crowded knots",
            valid_to_h=40_000.0,
        ),
        LumenCurve((0.0,), (0.9,), "hours", False, "one point: flat"),
        LumenCurve((5_000.0,), (0.95,), "hours", False, "one point away from 0"),
        LumenCurve((0.0, 1.0), (1.1, 0.8), "rated_life_fraction", False, "early gain"),
        exponential_curve(0.98, 7e-6, span_h=60_000.0),
        LumenCurve((0.0, 10_000.0, 20_000.0), (1.0, 1.0, 1.0), "hours", False, "flat tail"),
    ]
    return curves


def test_table_matches_each_curve_read_alone() -> None:
    """Same fractions as LumenCurve.at (scipy PchipInterpolator inside), to rounding."""
    curves = _curves()
    table = LumenTable.from_curves(curves)
    assert table.crowded  # the crowded curve takes the multi-step branch
    rng = np.random.default_rng(7)
    n = 200_000
    k = rng.integers(0, len(curves), n)
    hours = np.concatenate((rng.uniform(-10.0, 120_000.0, n - 4000), np.zeros(4000)))
    # exact knot positions in hours and the cell edges of the hours curves
    for j, c in enumerate(curves):
        if c.basis == "hours" and len(c.x) > 1:
            hours[: len(c.x)] = c.x
            k[: len(c.x)] = j
    life = rng.uniform(500.0, 3_000.0, n)
    got = table.at(k, hours, life)
    want = np.empty(n)
    for j, c in enumerate(curves):
        sel = k == j
        want[sel] = c.at(hours[sel], life[sel] if c.basis == "rated_life_fraction" else None)
    np.testing.assert_allclose(got, want, rtol=0, atol=1e-14)


def test_pieces_are_scipys_pchip() -> None:
    """Inside its points a curve reads scipy's PchipInterpolator of the same knots directly."""
    xs = (0.0, 2_000.0, 9_000.0, 16_000.0, 24_000.0)
    fs = (1.0, 0.97, 0.9, 0.88, 0.8)
    table = LumenTable.from_curves([LumenCurve(xs, fs, "hours", False, "test")])
    t = np.linspace(0.0, 24_000.0, 10_001)
    ref = PchipInterpolator(np.array(xs), np.array(fs))(t)
    got = table.at(np.zeros(t.size, dtype=np.intp), t, None)
    np.testing.assert_allclose(got, ref, rtol=0, atol=1e-14)


def test_beyond_last_point_straight_line_floored() -> None:
    """Past the last point: the last segment's slope, never rising, floored at 0."""
    curve = LumenCurve((0.0, 10_000.0), (1.0, 0.5), "hours", False, "steep")
    table = LumenTable.from_curves([curve])
    t = np.array([10_000.0, 15_000.0, 20_000.0, 40_000.0])
    got = table.at(np.zeros(4, dtype=np.intp), t, None)
    np.testing.assert_allclose(got, [0.5, 0.25, 0.0, 0.0], atol=1e-15)


def test_rated_life_curves_need_a_life() -> None:
    """A rated-life curve without per-position lives is refused, as LumenCurve.at refuses."""
    table = LumenTable.from_curves([default_lumen_curve("incandescent")])
    with pytest.raises(ValueError, match="rated life"):
        table.at(np.zeros(2, dtype=np.intp), np.array([1.0, 2.0]), None)
