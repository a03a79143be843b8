"""The forecast's burnout range over the API against an independent Monte Carlo of the area.

Reference: a Monte Carlo of the same 120 positions that draws the Weibull scale from the
catalogue prior (ln eta ~ N(ln eta_hat, (ln 1.5 / 1.645)^2)) per replicate, then each lamp's
remaining life given its age by inverse transform of the conditional survival function.
"""

from __future__ import annotations

import math
from datetime import timedelta
from typing import Any

import numpy as np
import pytest
from fastapi.testclient import TestClient
from scipy.stats import norm
from sqlalchemy.orm import Session

from tests import factories as fx


def _get(client: TestClient, url: str, headers: dict[str, str], **params: Any) -> Any:
    r = client.get(url, params=params, headers=headers)
    assert r.status_code == 200, r.text
    return r.json()


def test_range_is_the_mixture_quantiles_against_an_independent_monte_carlo(
    db: Session, client: TestClient, reader: dict[str, str]
) -> None:
    s = fx.site(db)
    a = fx.area(db, s)
    lt = fx.lamp_type(db)  # incandescent, B50 1,000 h, beta 3.5, 230 V
    fx.fixtures(db, a, lt, 40, lamps=3)
    db.commit()
    at = fx.T0 + timedelta(days=30)  # 360 burn hours by the schedule
    body = _get(
        client,
        f"/api/v1/forecasts/areas/{a.id}",
        reader,
        horizon_weeks=4,
        at=at.isoformat(),
        positions="true",
    )
    summ = body["summary"]
    beta, w = 3.5, 4 * 84.0
    eta = 1000.0 / math.log(2.0) ** (1 / beta)  # Weibull scale from the B50 (closed form)
    ages = np.array([p["age_h"] for p in body["positions"]])
    x0, x1 = (ages / eta) ** beta, ((ages + w) / eta) ** beta
    p = 1.0 - np.exp(-(x1 - x0))
    assert summ["expected_failures_no_replacement"] == pytest.approx(p.sum(), rel=1e-9)
    # Independent Monte Carlo, 40,000 replicates: scale from the catalogue prior per replicate.
    sigma = math.log(1.5) / norm.ppf(0.95)
    rng = np.random.default_rng(12)
    counts = np.empty(40_000)
    for s0 in range(0, counts.size, 5000):
        e = eta * np.exp(sigma * rng.standard_normal(5000))[:, None]
        h0 = (ages[None, :] / e) ** beta
        life = e * (h0 + rng.exponential(size=(5000, ages.size))) ** (1 / beta)
        counts[s0 : s0 + 5000] = (life < ages[None, :] + w).sum(axis=1)
    # The range's ends: the count's 5 % and 95 % quantiles (smallest k with CDF >= level).
    mc_low, mc_high = (int(np.quantile(counts, q, method="inverted_cdf")) for q in (0.05, 0.95))
    assert abs(summ["burnouts_low"] - mc_low) <= 1, (summ, mc_low)
    assert abs(summ["burnouts_high"] - mc_high) <= 1, (summ, mc_high)
    covered = np.mean((counts >= summ["burnouts_low"]) & (counts <= summ["burnouts_high"]))
    assert covered >= 0.88, covered  # a discrete count's central range covers at least 90 %
    assert "mixture" in body["method"] and "90 %" in body["method"]
    assert body["areas"][0]["summary"]["burnouts_high"] == summ["burnouts_high"]
