"""Group orders whose plan picks another lamp: lines, stock reservation, completion, retries.

The hall of the hand-worked lamp choice (tests/service/planning/test_lamp_choice_hand.py,
its arithmetic in that module's docstring): 120 V filament lamps on circuits measured at
125 V, a 130 V lamp of the same family and, in some tests, an LED-lamp retrofit kit; here
with a Weibull shape of 3.5 and a spot call dearer than a group lamp, so that a group
relamp pays and the order carries a plan. As in the worked case the 130 V lamp (life x
(130/125)^13 = 1.67 against x 0.59: filament law, common practice) beats the 120 V one and
the LED beats both; each test reads the plan's choice and checks the order carries it.
"""

from __future__ import annotations

from datetime import timedelta
from typing import Any

import pytest
from sqlalchemy import func, select
from sqlalchemy.orm import Session

from service.api.errors import Invalid
from service.catalogue.models import LampChoiceRecord, LampType, RetrofitOption
from service.db.base import utcnow
from service.events.models import LampRemoval
from service.planning import service as planning
from service.planning.lamp_choice import RATED_FOR_VOLTAGE, RETROFIT
from service.register.models import Fixture
from service.stock import ledger
from service.stock.models import StockBalance, Storeroom, StoreroomSite
from service.workorders import service as orders
from service.workorders.models import WorkOrder
from service.workorders.schemas import CompleteBody, WorkOrderCreate
from tests import factories as fx

N, LAMPS = 4, 2  # four two-lamp fixtures


def hall(db: Session, *, led: bool = False, stock: int = 0, name: str = "") -> dict[str, Any]:
    """The hand case's hall (two-lamp fixtures), its storeroom; optionally the LED kit."""
    tag = f"{name}{led}"
    s = fx.site(db, f"Switch Works {tag}", time_zone="America/Chicago", nominal_voltage_v=120.0)
    a = fx.area(
        db, s, "Assembly Hall", hours_per_day=None, days_per_week=None,
        weekly_burn_hours=3000.0 / planning.WEEKS_PER_YEAR, group_minutes_per_lamp=6.0,
        spot_minutes_per_lamp=30.0,
    )  # fmt: skip
    common = {"rated_watts": 100.0, "rated_life_h": 1000.0, "weibull_shape": 3.5,
              "life_exponent": 13.0, "light_exponent": 3.4, "power_exponent": 1.6,
              "initial_lumens": 1600.0, "family": f"A19 100 W general service {tag}"}  # fmt: skip
    old = fx.lamp_type(db, f"GS-120-{tag}", rated_volts=120.0, unit_price=1.0, **common)
    new = fx.lamp_type(db, f"GS-130-{tag}", rated_volts=130.0, unit_price=1.2, **common)
    fixtures = fx.fixtures(
        db, a, old, N, lamps=LAMPS, installed_at=utcnow() - timedelta(days=200),
        measured_voltage_v=125.0,
    )  # fmt: skip
    if led:
        db.add(
            RetrofitOption(
                code="LED-A19-SW", kind="led_lamp", lamp_type_id=old.id, kit_cost_per_unit=8.0,
                labour_minutes_per_unit=10.0, rebate_per_unit=2.0, watts_per_unit=14.0,
                lumens_per_unit=1500.0, l70_h=25_000.0, failure_b10_h=25_000.0,
                failure_shape=1.0,
            )
        )  # fmt: skip
    room = Storeroom(name=f"Switch store {s.id}")
    db.add(room)
    db.flush()
    db.add(StoreroomSite(site_id=s.id, storeroom_id=room.id))
    for lt in (old, new):  # both stocked: only the chosen one may be drawn
        bal = StockBalance(storeroom_id=room.id, lamp_type_id=lt.id)
        db.add(bal)
        db.flush()
        if stock:
            ledger.move(db, ledger.lock_balance(db, room.id, lt.id), "received", stock)  # type: ignore[arg-type]
    db.flush()
    return {"area": a.id, "old": old.id, "new": new.id, "room": room.id,
            "fixtures": [f.id for f in fixtures]}  # fmt: skip


def _order(db: Session, area: int) -> WorkOrder:
    return orders.create(db, WorkOrderCreate(area_id=area, kind="group_relamp"))


def _fixture_types(db: Session, ids: list[int]) -> list[int]:
    db.expire_all()
    return [db.get(Fixture, i).lamp_type_id for i in ids]  # type: ignore[union-attr]


def test_lines_carry_the_lamp_rated_for_the_voltage(db: Session) -> None:
    k = hall(db)
    order = _order(db, k["area"])
    (choice,) = order.plan["lamp_choice"]  # type: ignore[index]
    assert choice["option_kind"] == RATED_FOR_VOLTAGE and choice["chosen_lamp_type_id"] == k["new"]
    assert len(order.lines) == N
    for ln in order.lines:
        assert (ln.lamp_type_id, ln.quantity) == (k["new"], LAMPS)
        assert ln.lamp_type_code == db.get(LampType, k["new"]).code  # type: ignore[union-attr]
        assert ln.extra["replaces_lamp_type_id"] == k["old"]  # type: ignore[index]
        assert ln.extra["option_kind"] == RATED_FOR_VOLTAGE  # type: ignore[index]
    record = db.scalar(select(LampChoiceRecord).where(LampChoiceRecord.work_order_id == order.id))
    assert record is not None and record.lamp_type_id == k["new"]


def test_issuing_reserves_the_chosen_lamps_only(db: Session) -> None:
    k = hall(db, stock=20)
    order = _order(db, k["area"])
    orders.issue(db, order.id)
    new = ledger.get_balance(db, k["room"], k["new"])
    old = ledger.get_balance(db, k["room"], k["old"])
    assert (new.reserved, new.available) == (N * LAMPS, 20 - N * LAMPS)
    assert (old.reserved, old.available) == (0, 20)


def test_completion_switches_the_fixtures_and_keeps_the_old_type_in_the_removals(
    db: Session,
) -> None:
    k = hall(db, stock=20)
    order = _order(db, k["area"])
    orders.issue(db, order.id)
    orders.start(db, order.id)
    skipped = k["fixtures"][0]  # out of reach today: keeps its lamps and its type
    body = CompleteBody(
        outcomes=[{"fixture_id": skipped, "outcome": "skipped", "reason": "blocked"}],
        others="replaced",
    )
    orders.complete(db, order.id, body)
    assert _fixture_types(db, k["fixtures"]) == [k["old"]] + [k["new"]] * (N - 1)
    removed = db.execute(
        select(LampRemoval.lamp_type_id, func.count()).where(LampRemoval.work_order_id == order.id)
        .group_by(LampRemoval.lamp_type_id)
    ).all()  # fmt: skip
    assert removed == [(k["old"], (N - 1) * LAMPS)]  # the history of the type taken out
    new = ledger.get_balance(db, k["room"], k["new"])
    assert (new.on_hand, new.reserved) == (20 - (N - 1) * LAMPS, 0)  # issued; rest released
    assert ledger.get_balance(db, k["room"], k["old"]).on_hand == 20
    # A retried completion answers the order unchanged: no second switch, removal or issue.
    versions = [db.get(Fixture, f).version for f in k["fixtures"]]  # type: ignore[union-attr]
    orders.complete(db, order.id, body)
    db.expire_all()
    assert [db.get(Fixture, f).version for f in k["fixtures"]] == versions  # type: ignore[union-attr]
    assert (
        db.scalar(select(func.count()).where(LampRemoval.work_order_id == order.id))
        == (N - 1) * LAMPS
    )
    assert ledger.get_balance(db, k["room"], k["new"]).on_hand == 20 - (N - 1) * LAMPS


def test_a_switched_fixture_done_in_part_is_refused_and_nothing_is_written(db: Session) -> None:
    k = hall(db, stock=20)
    order = _order(db, k["area"])
    orders.issue(db, order.id)
    orders.start(db, order.id)
    db.commit()
    half = order.lines[0].position_ids[0]
    body = CompleteBody(
        positions=[{"position_id": half, "outcome": "skipped", "reason": "socket damaged"}],
        others="replaced",
    )
    with pytest.raises(Invalid) as err:
        orders.complete(db, order.id, body)
    assert "one lamp type per fixture" in str(err.value.errors)  # type: ignore[attr-defined]
    db.rollback()
    assert db.get(WorkOrder, order.id).state == "in_progress"  # type: ignore[union-attr]
    assert _fixture_types(db, k["fixtures"]) == [k["old"]] * N
    assert db.scalar(select(func.count()).where(LampRemoval.work_order_id == order.id)) == 0


def test_an_led_retrofit_fits_the_kits_catalogue_type(db: Session) -> None:
    k = hall(db, led=True)
    order = _order(db, k["area"])
    (choice,) = order.plan["lamp_choice"]  # type: ignore[index]
    assert choice["option_kind"] == RETROFIT
    kit = db.scalar(select(LampType).where(LampType.code == "LED-A19-SW"))
    assert kit is not None and kit.technology == "led" and not kit.contains_mercury
    assert (kit.rated_life_h, kit.rated_watts, kit.unit_price) == (25_000.0, 14.0, 8.0)
    assert {ln.lamp_type_id for ln in order.lines} == {kit.id}
    assert {ln.extra["retrofit_option_id"] for ln in order.lines} == {choice["retrofit_option_id"]}  # type: ignore[index]
    orders.issue(db, order.id)
    orders.start(db, order.id)
    orders.complete(db, order.id, CompleteBody(others="replaced"))
    assert _fixture_types(db, k["fixtures"]) == [kit.id] * N
    # The next order in the hall relamps the kit's type: the choice is not made twice.
    again = _order(db, k["area"])
    assert {ln.lamp_type_id for ln in again.lines} == {kit.id}
    assert all(ln.extra is None or ln.extra.get("replaces_lamp_type_id") in (None, kit.id)
               for ln in again.lines)  # fmt: skip
