"""Lamp choice over the API: the comparison route, retrofit options, the plan and the order."""

from __future__ import annotations

from datetime import UTC, datetime, timedelta

import pytest
from fastapi.testclient import TestClient
from sqlalchemy import func, select
from sqlalchemy.orm import Session

from service.catalogue.models import LampChoiceRecord, RetrofitOption
from service.planning import choice, service
from tests import factories as fx
from tests.http.web.signin import sign_in_as

NOW = datetime.now(UTC)


def _hall(db: Session, *, withdrawn: bool = False) -> tuple[int, int]:
    """A 120 V incandescent hall on 125 V with a 130 V sibling; committed."""
    s = fx.site(db, "Choice Works", time_zone="America/Chicago", nominal_voltage_v=120.0)
    s.emission_factor_kg_per_kwh = 0.4
    a = fx.area(db, s, "Main Hall", group_minutes_per_lamp=4.0, spot_minutes_per_lamp=20.0)
    fam = {"family": "A19 100 W", "rated_watts": 100.0, "initial_lumens": 1600.0}
    lt = fx.lamp_type(db, "GS-120", rated_volts=120.0, unit_price=1.0, **fam)
    if withdrawn:
        lt.withdrawn_after = (NOW - timedelta(days=400)).date()
        lt.withdrawn_market = "EU"
    fx.lamp_type(db, "GS-130", rated_volts=130.0, unit_price=1.3, **fam)
    fx.fixtures(db, a, lt, 6, installed_at=NOW - timedelta(days=200), measured_voltage_v=125.0)
    db.commit()
    return a.id, lt.id


def _option(lt_id: int, **over: object) -> dict[str, object]:
    body: dict[str, object] = {
        "code": "LED-A19-KIT", "kind": "led_lamp", "lamp_type_id": lt_id,
        "kit_cost_per_unit": 6.0, "labour_minutes_per_unit": 5.0,
        "rebate_per_unit": 1.0, "watts_per_unit": 14.0, "lumens_per_unit": 1500.0,
        "l70_h": 25_000.0, "failure_b10_h": 20_000.0,
    }  # fmt: skip
    body.update(over)
    return body


def test_comparison_route_matches_the_service(
    client: TestClient, db: Session, reader: dict[str, str], writer: dict[str, str]
) -> None:
    area_id, lt_id = _hall(db)
    r = client.post("/api/v1/retrofit-options", json=_option(lt_id), headers=writer)
    assert r.status_code == 201, r.text
    got = client.get(f"/api/v1/areas/{area_id}/lamp-choice", headers=reader)
    assert got.status_code == 200, got.text
    body = got.json()
    (t,) = body["lamp_types"]
    kinds = [o["kind"] for o in t["options"]]
    assert kinds == ["same_type", "rated_for_voltage", "retrofit"]
    # The API answers what the service computes for the same plan.
    plan = service.area_plan(db, area_id, last_relamps=lambda _s, _i: {})
    (tc,) = choice.area_choice(db, plan)
    for o, r_ in zip(t["options"], tc.comparison.results, strict=True):
        assert o["life_cycle_cost"] == pytest.approx(r_.life_cycle_cost, rel=1e-6)
    best = [o for o in t["options"] if o["best"]]
    assert len(best) == 1 and best[0]["label"] == t["best_label"]
    assert t["options"][2]["co2_saved_kg"] == pytest.approx(
        t["options"][2]["energy_saved_kwh"] * 0.4
    )
    # The plan shows the same best option.
    p = client.get(f"/api/v1/areas/{area_id}/relamp-plan", headers=reader).json()
    assert p["lamp_choice"][0]["best_label"] == t["best_label"]


@pytest.mark.parametrize(
    ("query", "field"),
    [("horizon_years=0", "horizon_years"), ("horizon_years=31", "horizon_years"),
     ("cleaning_minutes_per_fixture=-1", "cleaning_minutes_per_fixture")],
)  # fmt: skip
def test_comparison_query_validation_names_the_field(
    client: TestClient, db: Session, reader: dict[str, str], query: str, field: str
) -> None:
    area_id, _ = _hall(db)
    r = client.get(f"/api/v1/areas/{area_id}/lamp-choice?{query}", headers=reader)
    assert r.status_code == 422
    assert r.headers["content-type"].startswith("application/problem+json")
    assert field in r.text


@pytest.mark.parametrize(
    ("over", "field"),
    [({"kit_cost_per_unit": -1}, "kit_cost_per_unit"), ({"kind": "laser"}, "kind"),
     ({"l70_h": 1e9}, "l70_h"), ({"lamp_type_id": 999_999}, "lamp_type_id"),
     ({"area_id": 999_999}, "area_id"), ({"surprise": 1}, "surprise")],
)  # fmt: skip
def test_retrofit_option_validation_names_the_field(
    client: TestClient, db: Session, writer: dict[str, str], over: dict[str, object], field: str
) -> None:
    _, lt_id = _hall(db)
    r = client.post("/api/v1/retrofit-options", json=_option(lt_id, **over), headers=writer)
    assert r.status_code == 422, r.text
    assert field in r.text
    assert db.scalar(select(func.count(RetrofitOption.id))) == 0


def test_duplicate_code_is_a_conflict(
    client: TestClient, db: Session, writer: dict[str, str]
) -> None:
    _, lt_id = _hall(db)
    assert (
        client.post("/api/v1/retrofit-options", json=_option(lt_id), headers=writer).status_code
        == 201
    )
    r = client.post("/api/v1/retrofit-options", json=_option(lt_id), headers=writer)
    assert r.status_code == 409 and "code" in r.text


def test_group_order_names_the_choice_and_the_option_is_then_retired_not_deleted(
    client: TestClient, db: Session, writer: dict[str, str], reader: dict[str, str]
) -> None:
    area_id, lt_id = _hall(db, withdrawn=True)
    opt = client.post("/api/v1/retrofit-options", json=_option(lt_id), headers=writer).json()
    # The type is withdrawn in the EU; the site names no market, so the withdrawal applies.
    p = client.get(f"/api/v1/areas/{area_id}/relamp-plan", headers=reader).json()
    assert p["lamp_choice"][0]["replacement_required"] is True
    assert "replacement must be chosen" in " ".join(p["lamp_choice"][0]["notes"])
    r = client.post(
        "/api/v1/work-orders", json={"area_id": area_id, "kind": "group_relamp"}, headers=writer
    )
    assert r.status_code == 201, r.text
    named = r.json()["plan"]["lamp_choice"][0]
    assert named["option_kind"] in ("retrofit", "rated_for_voltage")
    assert db.scalar(select(func.count(LampChoiceRecord.id))) == 1
    if named["option_kind"] != "retrofit":
        pytest.fail(f"expected the LED to win on a withdrawn filament lamp: {named}")
    sign_in_as(client, db, "viewer")
    page = client.get(f"/app/work-orders/{r.json()['id']}")
    assert page.status_code == 200 and "LED-A19-KIT (LED lamp)" in page.text
    assert "a replacement must be chosen" in page.text
    oid = opt["id"]
    gone = client.delete(f"/api/v1/retrofit-options/{oid}", headers=writer)
    assert gone.status_code == 409 and "retire" in gone.text
    retired = client.post(f"/api/v1/retrofit-options/{oid}/retire", headers=writer)
    assert retired.status_code == 200 and retired.json()["retired_at"] is not None
    assert client.get("/api/v1/retrofit-options", headers=reader).json() == []
    listed = client.get("/api/v1/retrofit-options?include_retired=true", headers=reader).json()
    assert [o["id"] for o in listed] == [oid]


def test_an_option_without_history_can_be_deleted(
    client: TestClient, db: Session, writer: dict[str, str]
) -> None:
    _, lt_id = _hall(db)
    oid = client.post("/api/v1/retrofit-options", json=_option(lt_id), headers=writer).json()["id"]
    assert client.delete(f"/api/v1/retrofit-options/{oid}", headers=writer).status_code == 204
    assert client.get(f"/api/v1/retrofit-options/{oid}", headers=writer).status_code == 404


def test_market_mismatch_leaves_the_type_buyable(
    client: TestClient, db: Session, reader: dict[str, str]
) -> None:
    area_id, _ = _hall(db, withdrawn=True)
    site = db.scalar(select(service.Site))
    assert site is not None
    site.market = "US"  # withdrawn in the EU only
    db.commit()
    p = client.get(f"/api/v1/areas/{area_id}/relamp-plan", headers=reader).json()
    assert p["lamp_choice"][0]["replacement_required"] is False


def test_area_page_shows_the_comparison_table(
    client: TestClient, db: Session, writer: dict[str, str]
) -> None:
    area_id, lt_id = _hall(db)
    assert (
        client.post("/api/v1/retrofit-options", json=_option(lt_id), headers=writer).status_code
        == 201
    )
    sign_in_as(client, db, "viewer")
    r = client.get(f"/app/areas/{area_id}")
    assert r.status_code == 200, r.text
    table = r.text[r.text.index(f'id="lamp-choice-{lt_id}"') :]
    table = table[: table.index("</table>")]
    assert table.count("<tr") == 4  # header and three options
    assert "LED-A19-KIT (LED lamp)" in table and "GS-130 (rated 130 V)" in table
    assert table.count('class="best"') == 1
    assert "local codes" in r.text


def test_a_retried_create_with_its_idempotency_key_makes_one_option(
    client: TestClient, db: Session, writer: dict[str, str]
) -> None:
    _, lt_id = _hall(db)
    headers = {**writer, "Idempotency-Key": "retrofit-create-1"}
    first = client.post("/api/v1/retrofit-options", json=_option(lt_id), headers=headers)
    again = client.post("/api/v1/retrofit-options", json=_option(lt_id), headers=headers)
    assert first.status_code == again.status_code == 201
    assert first.json()["id"] == again.json()["id"]
    assert db.scalar(select(func.count(RetrofitOption.id))) == 1
