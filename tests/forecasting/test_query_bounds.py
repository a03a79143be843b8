"""What-if curve query values that overflow the model: a 422 naming the parameter.

Found by fuzzing: voltage_v=5e-324 made the voltage ratio zero (a 500), a t_max_h of 1e-54
made the renewal grid step zero (a 500), and tiny voltages gave infinite scales shown as
null where the schema promises a number.
"""

from __future__ import annotations

import pytest
from fastapi.testclient import TestClient
from sqlalchemy.orm import Session

from tests import factories as fx
from tests.api.test_bad_input_tour import assert_problem, error_fields


@pytest.mark.parametrize(
    ("query", "field"),
    [
        ("voltage_v=5e-324", "voltage_v"),
        ("voltage_v=0.5", "voltage_v"),
        ("voltage_v=nan", "voltage_v"),
        ("voltage_v=inf", "voltage_v"),
        ("t_max_h=1.7e-54", "t_max_h"),
        ("hours_per_start=1e-300", "hours_per_start"),
        ("points=100000", "points"),
        ("points=1.5", "points"),
    ],
)
def test_curve_parameters_out_of_range(
    client: TestClient, db: Session, reader: dict[str, str], query: str, field: str
) -> None:
    _, _, lt, _ = fx.two_fixture_area(db)
    r = client.get(f"/api/v1/forecasts/curve?lamp_type_id={lt.id}&{query}", headers=reader)
    assert error_fields(assert_problem(r, 422)) == {field}


def test_curve_at_the_bounds_is_finite(
    client: TestClient, db: Session, reader: dict[str, str]
) -> None:
    _, _, lt, _ = fx.two_fixture_area(db)
    for query in ("voltage_v=1&t_max_h=1", "voltage_v=1000&hours_per_start=0.01"):
        r = client.get(f"/api/v1/forecasts/curve?lamp_type_id={lt.id}&{query}", headers=reader)
        assert r.status_code == 200, r.text
        body = r.json()
        for name in ("life_factor", "light_factor", "power_factor", "shape", "scale_h"):
            assert isinstance(body[name], float), (query, name, body[name])
        assert None not in body["survival"] and None not in body["renewal_m"]


@pytest.mark.parametrize("horizon", ["1e-308", "0", "0.0009", "521", "nan"])
def test_forecast_horizon_out_of_range(
    client: TestClient, db: Session, reader: dict[str, str], horizon: str
) -> None:
    # Found by fuzzing on PostgreSQL: horizon_weeks=1.1e-308 gave expected_burnouts_spot
    # NaN, sent as null against the documented number.
    s, a, lt, _ = fx.two_fixture_area(db)
    for url in (
        f"/api/v1/forecasts/sites/{s.id}",
        f"/api/v1/forecasts/areas/{a.id}",
        f"/api/v1/forecasts/lamp-types/{lt.id}",
    ):
        r = client.get(f"{url}?horizon_weeks={horizon}", headers=reader)
        assert error_fields(assert_problem(r, 422)) == {"horizon_weeks"}


def test_smallest_horizon_gives_numbers(
    client: TestClient, db: Session, reader: dict[str, str]
) -> None:
    s, _, _, _ = fx.two_fixture_area(db)
    r = client.get(f"/api/v1/forecasts/sites/{s.id}?horizon_weeks=0.001", headers=reader)
    assert r.status_code == 200, r.text
    assert all(v is not None for k, v in r.json()["summary"].items() if k != "mean_age_h")
