"""The forecast's burnout range over the API: Poisson-binomial plus the catalogue prior."""

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


def test_range_is_the_normal_interval_of_events_plus_parameter_variance(
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
    # Catalogue curve, no field records: sd of ln eta = ln 1.5 / z_0.95 (the stated prior);
    # d p / d ln eta = -(1 - p) beta (H1 - H0), summed over the type (delta method).
    sigma = math.log(1.5) / norm.ppf(0.95)
    grad = float((-(1 - p) * beta * (x1 - x0)).sum())
    sd = math.sqrt(float((p * (1 - p)).sum()) + (grad * sigma) ** 2)
    z = norm.ppf(0.95)
    mu = float(p.sum())
    assert summ["burnouts_low"] == max(math.ceil(mu - z * sd - 0.5), 0)
    assert summ["burnouts_high"] == min(math.ceil(mu + z * sd - 0.5), p.size)
    assert summ["burnouts_low"] < mu < summ["burnouts_high"]
    assert "delta-method" in body["method"] and "90 %" in body["method"]
    assert body["areas"][0]["summary"]["burnouts_high"] == summ["burnouts_high"]
