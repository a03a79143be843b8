"""Batched burnout ranges (reliability/mixture_batch.py) against count_mixture one by one.

Reference: uncertainty.count_mixture called selection by selection, the forecasts' method
before batching, itself checked against an independent Monte Carlo of the fleet in
tests/unit/reliability/test_mixture.py. The fleet mixes what the batch has to keep apart:
lamp types with and without scale spread, with shape spread (5 outer nodes), areas of one
lamp and of thousands, single-type areas (the bisection), exact and refined-normal items,
Poisson rows, new lamps, and a whole-fleet selection wide enough to be binned.
"""

from __future__ import annotations

import numpy as np
import pytest

from service.reliability import mixture as mx
from service.reliability.mixture_batch import FleetCurves, build_items, count_mixtures
from service.reliability.uncertainty import CountRange, GroupCurve, count_mixture

SHAPE = np.array([1.2, 3.0, 5.0, 2.0, 8.0])
SCALE_H = np.array([50_000.0, 1_000.0, 24_000.0, 15_000.0, 9_000.0])
SD_SHAPE = np.array([0.0, 0.0, 0.15, 0.0, 0.3])
SD_SCALE = np.array([0.246, 0.08, 0.1, 0.0, 0.246])


def _fleet(seed: int) -> tuple[FleetCurves, list[np.ndarray]]:
    rng = np.random.default_rng(seed)
    sizes = [1, 1, 2, 3, 5, 8, 12, 20, 30, 45, 60, 100, 150, 300, 800, 2500, 6000]
    sizes += rng.integers(1, 400, 12).tolist()
    area = np.repeat(np.arange(len(sizes)), sizes)
    n = area.size
    grp = rng.integers(0, SHAPE.size, n)
    for a in range(0, len(sizes), 3):  # every third area holds one lamp type only
        grp[area == a] = a % SHAPE.size
    grp[area == 16] = 4  # 6,000 lamps of a wide spread: a span wider than MAX_BINS counts
    age = rng.uniform(0.0, 1.3, n) * SCALE_H[grp]
    age[rng.random(n) < 0.05] = 0.0  # lamps going in now
    horizon = np.where(rng.random(n) < 0.5, 13 * 60.0, 13 * 168.0)
    shape = SHAPE[grp] * np.where(rng.random(n) < 0.2, 1.05, 1.0)  # voltage-response rows
    scale = SCALE_H[grp] * np.exp(rng.normal(0.0, 0.1, n))  # life factors
    fleet = FleetCurves(grp.astype(np.int64), age, horizon, shape, scale, SD_SHAPE, SD_SCALE)
    selections = [np.nonzero(area == a)[0] for a in range(len(sizes))]
    return fleet, [*selections, np.arange(n), np.zeros(0, dtype=np.int64)]


def _one_by_one(fleet: FleetCurves, sel: np.ndarray) -> CountRange:
    grp = fleet.group[sel]
    groups = []
    for g in np.unique(grp).tolist():
        j = sel[grp == g]
        groups.append(
            GroupCurve(
                fleet.age_h[j],
                fleet.horizon_h[j],
                fleet.shape[j],
                fleet.scale_h[j],
                float(fleet.sd_ln_shape[g]),
                float(fleet.sd_ln_scale[g]),
            )
        )
    return count_mixture(groups, 0.90)


@pytest.mark.parametrize("seed", [0, 1])
def test_batched_ranges_equal_the_per_area_ones_on_a_varied_fleet(seed: int) -> None:
    fleet, selections = _fleet(seed)
    got = count_mixtures(fleet, selections, 0.90)
    assert len(got) == len(selections)
    for sel, a in zip(selections, got, strict=True):
        b = _one_by_one(fleet, sel)
        assert (a.low, a.high) == (b.low, b.high), sel.size
        assert a.method == b.method and a.level == b.level
        assert a.mean == pytest.approx(b.mean, rel=1e-12, abs=1e-12)
        assert a.var_events == pytest.approx(b.var_events, rel=1e-12, abs=1e-12)
        assert a.var_params == pytest.approx(b.var_params, rel=1e-9, abs=1e-9)


def test_the_varied_fleet_takes_every_path_of_the_method() -> None:
    fleet, selections = _fleet(0)
    items = build_items(fleet, selections)
    methods = {m.method for m in items.mixtures}
    assert methods == {"exact", "rna"}
    rna = [m for m in items.mixtures if m.fine is not None and m.fine.mean.shape[0] > 1]
    poisson = [bool(mx.poisson_regime(m.fine.mean[:, 0], m.fine.var[:, 0]).any()) for m in rna]  # type: ignore[union-attr]
    assert any(poisson) and not all(poisson)
    per_sel = np.bincount(items.sel, minlength=len(selections))
    assert (per_sel == 1).any() and (per_sel > 1).any()  # bisection and binned totals
    assert (items.node_w < 1).any()  # the shape's outer nodes
    wide = items.spans[items.sel == len(selections) - 2]
    assert int((wide[:, 1] - wide[:, 0]).max()) + 1 > mx.MAX_BINS  # binned in widths > 1


def test_a_selection_without_positions_has_an_empty_range() -> None:
    fleet, _ = _fleet(0)
    (r,) = count_mixtures(fleet, [np.zeros(0, dtype=np.int64)])
    assert (r.low, r.high, r.mean) == (0, 0, 0.0)
    with pytest.raises(ValueError):
        count_mixtures(fleet, [np.arange(3)], level=1.0)
