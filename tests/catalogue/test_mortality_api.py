"""The mortality fit in a lamp type's model block, against the numeric core's fit."""

from __future__ import annotations

import pytest
from fastapi.testclient import TestClient

from service.reliability.mortality import fit_mortality_points

BODY = {
    "code": "T5-28-MORT",
    "technology": "linear_fluorescent",
    "rated_watts": 28,
    "rated_volts": 230,
    "rated_life_h": 24000,
    "rated_percentile": 50,
    "unit_price": 3.1,
}
# Invented maker points whose own median is near 120 % of the rated life.
POINTS = [[40.0, 97.0], [80.0, 80.0], [120.0, 50.0], [150.0, 25.0]]


def test_model_block_shows_both_scales_and_uses_the_rated_life(
    client: TestClient, writer: dict[str, str]
) -> None:
    r = client.post("/api/v1/lamp-types", json={**BODY, "mortality_points": POINTS}, headers=writer)
    assert r.status_code == 201, r.text
    m = r.json()["model"]
    core = fit_mortality_points([p[0] for p in POINTS], [p[1] for p in POINTS], 24_000.0, 50.0)
    mf = m["mortality_fit"]
    assert m["shape"] == pytest.approx(core.shape, rel=1e-12) and m["sources"]["shape"] == "fit"
    assert m["scale_h"] == pytest.approx(core.scale_h, rel=1e-12)
    assert mf["used_for_shape"] is True
    assert mf["scale_h"] == pytest.approx(core.scale_h, rel=1e-12)
    assert mf["curve_scale_h"] == pytest.approx(core.curve_scale_h, rel=1e-12)
    assert mf["curve_life_h"] == pytest.approx(core.curve_life_h, rel=1e-12)
    assert mf["life_disagreement"] == pytest.approx(core.life_disagreement, rel=1e-12)
    assert mf["life_disagreement"] > 0.1 and mf["warnings"]  # curve median ~1.2 x rated
    assert mf["r_squared"] == pytest.approx(core.r_squared, rel=1e-12)
    assert [p[:2] for p in mf["points"]] == POINTS
    assert [p[2] for p in mf["points"]] == pytest.approx(list(core.fitted_pct_surviving))

    # A catalogue shape wins; the fit is still shown, marked unused.
    r = client.patch(
        f"/api/v1/lamp-types/{r.json()['id']}", json={"weibull_shape": 5.0}, headers=writer
    )
    assert r.status_code == 200, r.text
    m = r.json()["model"]
    assert m["shape"] == 5.0 and m["mortality_fit"]["used_for_shape"] is False


def test_no_points_no_block_and_rising_survival_is_422(
    client: TestClient, writer: dict[str, str]
) -> None:
    r = client.post("/api/v1/lamp-types", json=BODY, headers=writer)
    assert r.status_code == 201 and r.json()["model"]["mortality_fit"] is None
    bad = {**BODY, "code": "T5-BAD", "mortality_points": [[50, 40], [100, 60]]}
    r = client.post("/api/v1/lamp-types", json=bad, headers=writer)
    assert r.status_code == 422, r.text
    assert "mortality_points" in {e["field"].split(".")[0] for e in r.json()["errors"]}
