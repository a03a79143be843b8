"""LED lamp types: L70 lumen life apart from catastrophic failures, and TM-21 from LM-80 data.

Sources beside each check: IES TM-21-11 (window: last 5,000 h of a 6,000-10,000 h test;
least squares on ln flux; cap 6 x the test duration for 20+ units), computed by hand here
with numpy's polyfit as the independent least-squares reference; Weibull B10 closed form.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from fastapi.testclient import TestClient

from service.reliability.tm21 import tm21_projection
from service.reliability.weibull import scale_from_rated_life

B_TRUE, ALPHA_TRUE = 0.99, 2.0e-6  # per hour: L70 = ln(99/70)/2e-6 = 173,000 h (beyond the cap)
HOURS = [0, 500, 1_000, 2_000, 3_000, 4_000, 5_000, 6_000, 7_000, 8_000, 9_000, 10_000]


def _flux() -> list[float]:
    # Data of our own: rises in the first 1,000 h (as most LM-80 data does), then decays.
    out = []
    for h in HOURS:
        early = 0.015 if h in (500, 1_000) else 0.0
        out.append(B_TRUE * math.exp(-ALPHA_TRUE * h) + early if h else 1.0)
    return out


LED = {
    "code": "LED-TM21",
    "technology": "led",
    "rated_watts": 20.0,
    "rated_volts": 230.0,
    "rated_life_h": 50_000.0,  # L70, a lumen criterion
    "weibull_shape": 1.5,
}


def test_tm21_from_lm80_points_capped_and_labelled(
    client: TestClient, writer: dict[str, str]
) -> None:
    pts = [[h, f] for h, f in zip(HOURS, _flux(), strict=True)]
    body = {**LED, "lm80_points": pts, "lm80_units": 25, "lm80_duration_h": 10_000.0}
    r = client.post("/api/v1/lamp-types", json=body, headers=writer)
    assert r.status_code == 201, r.text
    model = r.json()["model"]
    # TM-21: a 10,000 h test fits its last 5,000 h; the early rise is outside the window.
    window = [(h, f) for h, f in zip(HOURS, _flux(), strict=True) if h >= 5_000]
    slope, intercept = np.polyfit([w[0] for w in window], np.log([w[1] for w in window]), 1)
    assert model["lumen_curve"]["decay_alpha_per_h"] == pytest.approx(-slope, rel=1e-9)
    assert model["lumen_curve"]["decay_b"] == pytest.approx(math.exp(intercept), rel=1e-9)
    # L70 = ln(100 B / 70) / alpha = 173,000 h > 6 x 10,000 h: reported at the cap.
    assert model["lumen_life_label"] == "L70(10k) > 60,000 h"
    assert model["lumen_valid_to_h"] == 60_000.0
    # The curve is held at the cap instead of extrapolated (TM-21: nothing reported past it).
    proj = tm21_projection(HOURS, _flux(), sample_size=25)
    at = proj.lumen_curve().at([30_000.0, 60_000.0, 120_000.0])
    assert at[0] > at[1] and at[2] == at[1]
    assert at[1] == pytest.approx(proj.B * math.exp(-proj.alpha * 60_000.0))


def test_led_failures_from_b10_not_from_l70(client: TestClient, writer: dict[str, str]) -> None:
    # Weibull closed form: eta = B10 / (-ln 0.9)^(1/beta).
    r = client.post("/api/v1/lamp-types", json={**LED, "failure_b10_h": 80_000.0}, headers=writer)
    assert r.status_code == 201, r.text
    m = r.json()["model"]
    assert m["scale_h"] == pytest.approx(float(scale_from_rated_life(80_000.0, 1.5, 10.0)))
    assert m["failure_life_h"] == 80_000.0 and m["sources"]["failure_life_h"] == "catalogue"
    # Without a failure figure: the technology default, labelled as an assumption.
    r2 = client.post("/api/v1/lamp-types", json={**LED, "code": "LED-DEF"}, headers=writer)
    m2 = r2.json()["model"]
    assert "assumption" in m2["sources"]["failure_life_h"]
    assert m2["lumen_life_label"] == "L70 = 50,000 h (catalogue)"
    # F(25,000 h) is no longer the 22 % of treating L70 as a failure median.
    f25 = 1.0 - math.exp(-((25_000.0 / m2["scale_h"]) ** 1.5))
    assert f25 < 0.05


def test_lm80_data_that_cannot_be_projected_is_refused(
    client: TestClient, writer: dict[str, str]
) -> None:
    short = [[0, 1.0], [1_000, 1.01], [3_000, 0.99]]  # TM-21 needs 6,000 h or more
    r = client.post(
        "/api/v1/lamp-types", json={**LED, "lm80_points": short, "lm80_units": 25}, headers=writer
    )
    assert r.status_code == 422
    assert "lm80_points" in r.text and "TM-21" in r.text
    few = [[h, f] for h, f in zip(HOURS, _flux(), strict=True)]
    r = client.post(
        "/api/v1/lamp-types", json={**LED, "lm80_points": few, "lm80_units": 5}, headers=writer
    )
    assert r.status_code == 422
