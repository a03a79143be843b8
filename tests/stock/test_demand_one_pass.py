"""The one-pass weekly spot curves against the old per-boundary path, closed forms and the demo.

References: the exponential life's delayed renewal count N_a(w) = w / eta at any age (the
Poisson process is memoryless) [Cox, *Renewal Theory*]; the old path
(forecasting.spot_replacements, one Stieltjes sum per week boundary) at its own resolution and
refined to 400 cells, an independent quadrature of the same integral.
"""

from __future__ import annotations

from datetime import timedelta
from pathlib import Path

import numpy as np
import pytest
from sqlalchemy import select
from sqlalchemy.orm import Session

import service.forecasting.spot_replacements as old_path
from service.db.base import utcnow
from service.forecasting.fit import load_fitted_types
from service.forecasting.service import evaluate_positions
from service.readings.ages import position_ages
from service.register.models import LampPosition, Site
from service.reliability import poisson_binomial
from service.seed.loader import load_demo
from service.stock import demand
from service.stock.forecast import alike_cumulative, group_weeks, position_cumulative
from service.workorders.repository import last_group_relamps
from tests import factories as fx

WEEKS = 26


def _old(
    shape: np.ndarray, k: np.ndarray, scale: np.ndarray, age: np.ndarray, rate: np.ndarray
) -> np.ndarray:
    """The old path: a delayed-renewal sum per (position, week boundary)."""
    n, h1 = age.size, WEEKS + 1
    win = (rate[:, None] * np.arange(h1)[None, :]).ravel()
    rep = np.repeat
    return old_path.expected_replacements(
        shape, rep(k, h1), rep(scale, h1), rep(age, h1), win
    ).reshape(n, h1)


def _fleet(n: int, seed: int) -> tuple[np.ndarray, ...]:
    rng = np.random.default_rng(seed)
    k = rng.integers(0, 3, n).astype(np.int64)
    shape = np.array([5.0, 3.0, 1.5])
    scale = np.array([20_000.0, 1_100.0, 9_000.0])[k] * rng.uniform(0.8, 1.2, n)
    age = rng.uniform(0, 1.2, n) * scale
    rate = rng.choice([40.0, 84.0, 168.0], n)
    return shape, k, scale, age, rate


def test_exponential_life_counts_w_over_eta_at_any_age() -> None:
    # Cox, Renewal Theory: with exponential lives the count in (a, a + w] is Poisson(w/eta).
    n = 50
    age = np.linspace(0.0, 30_000.0, n)
    scale = np.full(n, 8_000.0)
    rate = np.full(n, 100.0)
    got = demand.weekly_cumulative(np.array([1.0]), np.zeros(n, np.int64), scale, age, rate, WEEKS)
    want = rate[:, None] * np.arange(WEEKS + 1)[None, :] / scale[:, None]
    assert np.allclose(got, want, rtol=2e-4, atol=1e-9)


def test_one_pass_agrees_with_the_old_path_and_is_closer_to_a_fine_quadrature(
    monkeypatch: pytest.MonkeyPatch,
) -> None:
    shape, k, scale, age, rate = _fleet(600, seed=4)
    new = demand.weekly_cumulative(shape, k, scale, age, rate, WEEKS)
    old = _old(shape, k, scale, age, rate)
    # The old path's own quadrature error is up to about 1-2e-2 at 26 weeks on 900-1,300 h
    # lamps burning 168 h a week (24 cells of over a week each).
    assert np.abs(new - old).max() < 0.02
    assert np.abs(new.sum(axis=0) - old.sum(axis=0)).max() <= 1e-3 * old.sum(axis=0).max()
    monkeypatch.setattr(old_path, "NODES", 400)  # the same integral on 400 cells
    fine = _old(shape, k, scale, age, rate)
    assert np.abs(new - fine).max() < 1e-3
    assert np.abs(new - fine).max() < np.abs(old - fine).max()


def test_one_pass_matches_the_old_path_on_the_demo(db: Session, tmp_path: Path) -> None:
    load_demo(db, key_file=tmp_path / "key.txt")
    db.commit()
    at = utcnow()
    checked = 0
    for site in db.scalars(select(Site).order_by(Site.id)).all():
        ages = position_ages(db, site_id=site.id, at=at, active_only=True)
        if ages.size == 0:
            continue
        types = load_fitted_types(
            db, ages.lamp_type_id, field_fit=True, ballast_kinds=ages.ballast_kind
        )
        pf = evaluate_positions(ages, types, float(WEEKS))
        k = types.index(ages.lamp_type_id, ages.ballast_kind)
        age = np.where(ages.burned_out, 0.0, ages.age_h)
        args = (types.table.shape, k, pf.fleet.scale_h, age, ages.burn_h_per_week)
        new = demand.weekly_cumulative(*args, WEEKS)
        old = _old(*args)
        assert np.abs(new - old).max() < 0.01
        # Weekly spot means per lamp type (what the demand answer shows) within 1 %.
        for t in np.unique(ages.lamp_type_id):
            sel = ages.lamp_type_id == t
            a, b = np.diff(new[sel], axis=1).sum(0), np.diff(old[sel], axis=1).sum(0)
            assert np.all(np.abs(a - b) <= 0.01 * np.maximum(b, 1.0))
        checked += ages.size
    assert checked > 100


def test_group_weeks_lookup() -> None:
    area = np.array([5, 5, 6, 7, 6])
    lt = np.array([1, 2, 1, 1, 2])
    got = group_weeks(area, lt, {(5, 2): 3, (6, 1): 0, (9, 9): 1}, WEEKS)
    assert got.tolist() == [WEEKS, 3, 0, WEEKS, WEEKS]


def test_dark_lamp_of_a_first_week_group_relamp_is_not_also_spot_demand(db: Session) -> None:
    # The group order relamps the dark position too (its report goes onto the order): one lamp.
    s = fx.site(db)
    lt = fx.lamp_type(db, rated_life_h=1000.0)
    a = fx.area(db, s)  # 84 h a week
    long_ago = utcnow() - timedelta(weeks=30)  # 2,520 h: well past any group interval
    fixtures = fx.fixtures(db, a, lt, 6, installed_at=long_ago)
    pos = db.scalars(select(LampPosition).where(LampPosition.fixture_id == fixtures[0].id)).one()
    pos.burned_out_at = utcnow() - timedelta(days=1)
    db.commit()
    sc = position_cumulative(db, s, utcnow(), WEEKS, last_group_relamps)
    assert sc.group_by_type[lt.id][0] == 6  # the group relamp is due now, all six positions
    assert not sc.dark.any()  # so the dark one is not counted a second time as spot demand
    assert demand.dark_spot_lamps(np.array([True, True]), np.array([0, 3])).tolist() == [
        False,
        True,
    ]


def test_weekly_exact_quantiles_match_the_dft_and_scipy() -> None:
    # Fernandez & Williams 2010 (the DFT pmf) and scipy.stats.poisson_binom, week by week.
    from scipy import stats

    rng = np.random.default_rng(8)
    p = rng.uniform(0.0, 0.2, (60, 5))
    pmf = poisson_binomial.pmf_weeks(p)
    for w in range(5):
        assert np.allclose(pmf[w], demand.pmf_dft(p[:, w]), atol=1e-12)
        assert np.allclose(pmf[w], stats.poisson_binom(p[:, w]).pmf(np.arange(61)), atol=1e-10)
    big = rng.uniform(0.0, 0.05, (demand.EXACT_MAX, 26))
    for level in (0.5, 0.95, 0.99):
        got = poisson_binomial.quantiles_exact(big, level)
        want = [demand.quantile_exact(big[:, w], level) for w in range(26)]
        assert got.tolist() == want


def test_the_middle_node_is_the_nominal_pass() -> None:
    # The mixture's middle node (z = 0) is the nominal scale: its curves stand in for the
    # nominal pass (stock.forecast.alike_cumulative), group relamps included.
    shape, k, scale, age, rate = _fleet(600, 11)
    scale, age = np.round(scale, -2), np.round(age, -2)  # repeats, as a fixture's lamps
    gw = np.random.default_rng(3).choice([0, 5, 30, WEEKS], age.size).astype(np.int64)
    sd = np.full(age.size, 0.246)
    _, nominal = demand.node_passes(shape, k, scale, age, rate, WEEKS, gw, sd, k)
    want = alike_cumulative(shape, k, scale, age, rate, WEEKS, gw)
    assert nominal is not None
    np.testing.assert_allclose(nominal, want, rtol=1e-9, atol=1e-12)
