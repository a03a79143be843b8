"""Weekly demand mixed over the lamp types' uncertain scale, against an independent Monte Carlo.

Reference: a Monte Carlo of the demo fleet that draws each lamp type's Weibull scale from its
lognormal (sd of ln eta from the curve in use, the catalogue prior ln 1.5 / 1.645 = 0.246
where no field record) once per replicate, then every position's lamps in turn: the lamp in
place fails at its conditional Weibull life given its age (inverse transform of the
conditional survival function), each replacement at a fresh Weibull life; spot lamps are
counted per week of burn hours. The issue's tolerance: week-by-week mean within 2 %, the
service-level quantile within one lamp or 3 %.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest
from sqlalchemy import select
from sqlalchemy.orm import Session

from service.db.base import utcnow
from service.forecasting.fit import load_fitted_types
from service.forecasting.ranges import type_spreads
from service.forecasting.service import evaluate_positions
from service.readings.ages import position_ages
from service.register.models import Site
from service.seed.loader import load_demo
from service.stock import demand

WEEKS = 26
LEVEL = 0.95


def simulate_weekly(
    beta: np.ndarray,
    eta: np.ndarray,
    age: np.ndarray,
    rate: np.ndarray,
    sigma: float,
    reps: int,
    seed: int,
) -> np.ndarray:
    """(reps, WEEKS) spot replacements of one lamp type's positions, scale drawn per replicate."""
    rng = np.random.default_rng(seed)
    out = np.zeros((reps, WEEKS))
    horizon = rate * WEEKS  # burn hours per position over the horizon
    for s0 in range(0, reps, 500):
        m = min(500, reps - s0)
        e = eta[None, :] * np.exp(sigma * rng.standard_normal(m))[:, None]
        h0 = (age[None, :] / e) ** beta[None, :]
        t = e * (h0 + rng.exponential(size=e.shape)) ** (1 / beta[None, :]) - age[None, :]
        rows = np.arange(m)[:, None] * np.ones_like(t, dtype=np.int64)
        while True:
            live = t < horizon[None, :]
            if not live.any():
                break
            wk = np.floor(t[live] / np.broadcast_to(rate, t.shape)[live]).astype(np.int64)
            np.add.at(out[s0 : s0 + m], (rows[live], wk), 1.0)
            life = e * rng.exponential(size=e.shape) ** (1 / beta[None, :])
            t = np.where(live, t + life, np.inf)
    return out


def _demo_site(db: Session, tmp_path: Path) -> tuple:
    load_demo(db, key_file=tmp_path / "key.txt")
    db.commit()
    at = utcnow()
    best = None
    for site in db.scalars(select(Site).order_by(Site.id)).all():
        ages = position_ages(db, site_id=site.id, at=at, active_only=True)
        if best is None or ages.size > best[1].size:
            best = (site, ages)
    assert best is not None
    ages = best[1]
    types = load_fitted_types(
        db, ages.lamp_type_id, field_fit=True, ballast_kinds=ages.ballast_kind
    )
    pf = evaluate_positions(ages, types, float(WEEKS))
    return ages, types, pf


def test_demo_demand_mixture_against_an_independent_monte_carlo(
    db: Session, tmp_path: Path
) -> None:
    ages, types, pf = _demo_site(db, tmp_path)
    k = types.index(ages.lamp_type_id, ages.ballast_kind)
    shape = types.table.shape
    age = np.where(ages.burned_out, 0.0, ages.age_h)
    ids, inv = np.unique(ages.lamp_type_id, return_inverse=True)
    sd_scale = type_spreads(types, ids)[1][inv.ravel()]
    scale = pf.fleet.scale_h
    rate = ages.burn_h_per_week
    no_group = np.full(ages.size, WEEKS, dtype=np.int64)
    nodes = demand.node_demand(
        shape, k, scale, age, rate, WEEKS, no_group, sd_scale, ages.lamp_type_id
    )
    nominal = demand.weekly_increments(demand.weekly_cumulative(shape, k, scale, age, rate, WEEKS))
    checked = 0
    for t, nd in nodes.items():
        sel = ages.lamp_type_id == t
        got = demand.week_demand(nominal[sel], np.zeros(WEEKS, np.int64), LEVEL, 0.0, spread=nd)
        sims = simulate_weekly(
            shape[k[sel]], scale[sel], age[sel], rate[sel], float(sd_scale[sel][0]), 8000, int(t)
        )
        mc_mean = sims.mean(axis=0)
        # mean within 2 % plus the Monte Carlo's own 4 standard errors (for weeks of a few
        # thousandths of a lamp the sample sd is unreliable: at least the Poisson one, 130
        # comparisons over the demo's types and weeks)
        se = np.maximum(sims.std(axis=0), np.sqrt(got.spot_mean)) / np.sqrt(sims.shape[0])
        assert np.all(np.abs(got.spot_mean - mc_mean) <= 0.02 * mc_mean + 4 * se), t
        mc_q = np.quantile(sims, LEVEL, axis=0, method="inverted_cdf")
        tol = np.maximum(1.0, 0.03 * mc_q)
        assert np.all(np.abs(got.spot_quantile - mc_q) <= tol), (t, got.spot_quantile, mc_q)
        assert got.method.startswith("mixture")
        checked += int(sel.sum())
    assert checked > 100


def _synthetic(n: int = 3000, seed: int = 5) -> tuple[np.ndarray, ...]:
    """One lamp type (beta 3, eta 1,100 h), ages over a life, a third group-relamped."""
    rng = np.random.default_rng(seed)
    beta = np.full(n, 3.0)
    eta = np.full(n, 1100.0)
    age = rng.uniform(0.0, 0.9, n) * eta
    rate = rng.choice([60.0, 80.0], n)
    gw = np.where(rng.random(n) < 1 / 3, rng.integers(0, WEEKS, n), WEEKS).astype(np.int64)
    return beta, eta, age, rate, gw


def simulate_with_group(
    beta: np.ndarray,
    eta: np.ndarray,
    age: np.ndarray,
    rate: np.ndarray,
    gw: np.ndarray,
    sigma: float,
    reps: int,
    seed: int,
) -> np.ndarray:
    """As simulate_weekly, with a group relamp putting a new lamp in at the start of week gw
    (failures of the old lamp after that are not spot demand)."""
    rng = np.random.default_rng(seed)
    out = np.zeros((reps, WEEKS))
    horizon = rate * WEEKS
    t_group = np.where(gw < WEEKS, gw * rate, np.inf)
    for s0 in range(0, reps, 250):
        m = min(250, reps - s0)
        e = eta[None, :] * np.exp(sigma * rng.standard_normal(m))[:, None]
        rows = np.arange(m)[:, None] * np.ones(e.shape, dtype=np.int64)
        rr = np.broadcast_to(rate, e.shape)
        # phase 1: the lamp in place (and its spot replacements) until the group relamp
        h0 = (age[None, :] / e) ** beta[None, :]
        t = e * (h0 + rng.exponential(size=e.shape)) ** (1 / beta[None, :]) - age[None, :]
        end = np.minimum(horizon, t_group)[None, :]
        for start, stop in ((None, end), (t_group, horizon)):
            if start is not None:  # phase 2: a new lamp from the group relamp on
                t = np.where(np.isfinite(start)[None, :], start[None, :], np.inf)
                t = t + e * rng.exponential(size=e.shape) ** (1 / beta[None, :])
            while True:
                live = t < stop
                if not live.any():
                    break
                wk = np.floor(t[live] / rr[live]).astype(np.int64)
                np.add.at(out[s0 : s0 + m], (rows[live], wk), 1.0)
                t = np.where(
                    live, t + e * rng.exponential(size=e.shape) ** (1 / beta[None, :]), np.inf
                )
    return out


def _model(sigma: float) -> tuple[demand.WeekDemand, np.ndarray]:
    beta, eta, age, rate, gw = _synthetic()
    n = age.size
    k = np.zeros(n, dtype=np.int64)
    nodes = demand.node_demand(
        beta[:1], k, eta, age, rate, WEEKS, gw, np.full(n, sigma), np.zeros(n, dtype=np.int64)
    )
    p0 = np.zeros((0, WEEKS))
    got = demand.week_demand(p0, np.zeros(WEEKS, np.int64), LEVEL, 0.0, spread=nodes[0])
    sims = simulate_with_group(beta, eta, age, rate, gw, sigma, 6000, seed=77)
    return got, sims


def _close(mean: np.ndarray, q: np.ndarray, sims: np.ndarray) -> None:
    mc_mean = sims.mean(axis=0)
    se = sims.std(axis=0) / np.sqrt(sims.shape[0])
    assert np.all(np.abs(mean - mc_mean) <= 0.02 * mc_mean + 4 * se), (mean, mc_mean)
    mc_q = np.quantile(sims, LEVEL, axis=0, method="inverted_cdf")
    assert np.all(np.abs(q - mc_q) <= np.maximum(1.0, 0.03 * mc_q)), (q, mc_q)


def test_synthetic_fleet_demand_mixture_against_an_independent_monte_carlo() -> None:
    # 3,000 positions of one type at the catalogue prior's spread (sigma 0.246, beta 3), a
    # third group-relamped in the horizon: weekly means in the tens, where the quantile
    # check discriminates (a normal quantile of the same fleet misses it, next test).
    got, sims = _model(0.246)
    _close(got.spot_mean, got.spot_quantile, sims)


def test_the_normal_quantile_fails_the_same_demand_check() -> None:
    # The replaced attempt: the node-0 (nominal) mean with the variance sum p(1 - p) plus
    # the delta method's (d mean / d ln eta)^2 sigma^2, normal quantile; the same check fails.
    sigma = 0.246
    got, sims = _model(sigma)
    beta, eta, age, rate, gw = _synthetic()
    n, k = age.size, np.zeros(age.size, dtype=np.int64)
    lab = np.zeros(n, dtype=np.int64)
    eps = 1e-3
    at = [
        demand.node_demand(beta[:1], k, eta * np.exp(d), age, rate, WEEKS, gw, np.zeros(n), lab)[0]
        for d in (-eps, 0.0, eps)
    ]
    mean0 = at[1].weekly.mean[0]
    slope = (at[2].weekly.mean[0] - at[0].weekly.mean[0]) / (2 * eps)
    var = at[1].weekly.var[0] + (slope * sigma) ** 2
    q = np.ceil(mean0 + 1.6448536269514722 * np.sqrt(var) - 0.5)
    with pytest.raises(AssertionError):
        _close(got.spot_mean, q, sims)
