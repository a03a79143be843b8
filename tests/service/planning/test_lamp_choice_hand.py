"""A hand-worked lamp choice: a 120 V incandescent on 125 V against a 130 V lamp and an LED.

The case (invented figures): 10 one-lamp fixtures measured at 125 V, 3,000 burn hours a
year, tariff 0.15 a kWh rising 3 % a year, discount rate 8 %, labour 40 an hour, 6 minutes
per lamp for a group and for a spot replacement, no equipment hire, 0.4 kg CO2 a kWh.

Filament laws [practice: common practice, the classic exponents of the IES Lighting
Handbook's filament characteristic curves (recalled from memory)]: life x (V/Vr)^-13,
light x (V/Vr)^3.4, power x (V/Vr)^1.6. Life shape beta = 1 (exponential) so that the
renewal function is exact, M(t) = t/mu [published: Cox, Renewal Theory]; with equal group
and spot costs a block replacement then never pays (C(T) = c/T + c/mu > c/mu), so every
option is spot only after the relamp at time 0.

- A, the 120 V 100 W lamp (B50 1,000 h, price 1.00, 1,600 lm): eta = 1000/ln 2 = 1442.7 h
  at 120 V; at 125 V x (120/125)^13 = 0.5880 -> mu = 848.3 h; 3000/848.3 = 3.537 spot
  lamps a year per position; c = 1.00 + 6/60 x 40 = 5.00. Watts 100 x (125/120)^1.6 =
  106.75 W -> 320.2 kWh a position-year -> 48.04 a year at 0.15.
- B, the 130 V 100 W lamp (B50 1,000 h at 130 V, price 1.20): x (130/125)^13 = 1.665 ->
  mu = 2402 h, 1.249 spot lamps a year; c = 5.20. Watts 100 x (125/130)^1.6 = 93.92 W ->
  281.8 kWh, 42.26 a year. Light (125/130)^3.4 = 0.875 of its rated 1,600 lm.
- C, an LED lamp retrofit per fixture: kit 8.00, 10 minutes, rebate 2.00, 14 W, 1,500 lm,
  L70 = B10 = 25,000 h with failure shape 1: eta = 25000 / -ln(0.9) = 237,280 h; 3000/237280
  = 0.01264 failures a year; c = 8.00 + 10/60 x 40 = 14.67 (group and spot alike: the
  area's spot and group minutes are equal). 42 kWh, 6.30 a year.
Year 0: A 10 x 5.00 = 50.00; B 52.00; C 10 x 14.67 - 10 x 2.00 = 126.67.
Year k = 1..10: spot cost + energy x 1.03^(k-1); e.g. A year 1: 10 x 3.537 x 5.00 + 480.4
= 657.2; C year 1: 10 x 0.01264 x 14.67 + 63.0 = 64.85. C pays back its extra 76.67 in
76.67 / (657.2 - 64.85) = 0.13 years. Every NPV and IRR below is numpy-financial's on these
hand-built flows.
"""

from __future__ import annotations

import math
from datetime import UTC, datetime, timedelta

import numpy_financial as npf
import pytest
from sqlalchemy.orm import Session

from service.catalogue.models import RetrofitOption
from service.planning import choice, service
from service.planning.lamp_choice import RATED_FOR_VOLTAGE, RETROFIT, SAME_TYPE
from tests import factories as fx

AT = datetime(2026, 6, 1, 12, 0, tzinfo=UTC)
B_H = 3000.0  # burn hours a year
YEARS = 10
RATE, ESC, TARIFF, CO2 = 0.08, 0.03, 0.15, 0.4


def _case(db: Session, *, floor: float | None = None, withdrawn: bool = False) -> service.AreaPlan:
    s = fx.site(
        db, "Hand Case Works", time_zone="America/Chicago", nominal_voltage_v=120.0,
        discount_rate=RATE, energy_escalation_rate=ESC, emission_factor_kg_per_kwh=CO2,
    )  # fmt: skip
    s.energy_price_per_kwh = TARIFF
    a = fx.area(
        db, s, "Assembly Hall", hours_per_day=None, days_per_week=None,
        weekly_burn_hours=B_H / service.WEEKS_PER_YEAR, group_minutes_per_lamp=6.0,
        spot_minutes_per_lamp=6.0, equipment_hire_per_visit=0.0, light_floor=floor,
    )  # fmt: skip
    common = {"rated_watts": 100.0, "rated_life_h": 1000.0, "weibull_shape": 1.0,
              "life_exponent": 13.0, "light_exponent": 3.4, "power_exponent": 1.6,
              "initial_lumens": 1600.0, "family": "A19 100 W general service"}  # fmt: skip
    lt = fx.lamp_type(db, "GS-100-120", rated_volts=120.0, unit_price=1.0, **common)
    if withdrawn:
        lt.withdrawn_after = (AT - timedelta(days=30)).date()
    fx.lamp_type(db, "GS-100-130", rated_volts=130.0, unit_price=1.2, **common)
    fx.fixtures(db, a, lt, 10, installed_at=AT - timedelta(days=10), measured_voltage_v=125.0)
    db.add(
        RetrofitOption(
            code="LED-A19-14", kind="led_lamp", lamp_type_id=lt.id, kit_cost_per_unit=8.0,
            labour_minutes_per_unit=10.0, rebate_per_unit=2.0, watts_per_unit=14.0,
            lumens_per_unit=1500.0, l70_h=25_000.0, failure_b10_h=25_000.0, failure_shape=1.0,
        )
    )  # fmt: skip
    db.flush()
    over = service.PlanOverrides(at=AT)
    return service.area_plan(db, a.id, over, last_relamps=lambda _s, _ids: {})


def _flows(year0: float, spots_per_year: float, c: float, kwh_per_year: float) -> list[float]:
    """Hand-built yearly costs: year 0, then spots x cost + energy escalated."""
    return [year0] + [
        spots_per_year * c + kwh_per_year * TARIFF * (1 + ESC) ** (k - 1)
        for k in range(1, YEARS + 1)
    ]


def _hand() -> dict[str, list[float]]:
    mu_a = 1000.0 / math.log(2.0) * (120.0 / 125.0) ** 13
    mu_b = 1000.0 / math.log(2.0) * (130.0 / 125.0) ** 13
    mu_c = 25_000.0 / -math.log(0.9)
    c_c = 8.0 + 10.0 / 60.0 * 40.0
    return {
        SAME_TYPE: _flows(50.0, 10 * B_H / mu_a, 5.0, 10 * 100 * (125 / 120) ** 1.6 * B_H / 1000),
        RATED_FOR_VOLTAGE: _flows(
            52.0, 10 * B_H / mu_b, 5.2, 10 * 100 * (125 / 130) ** 1.6 * B_H / 1000
        ),
        RETROFIT: _flows(10 * c_c - 20.0, 10 * B_H / mu_c, c_c, 10 * 14.0 * B_H / 1000),
    }


def test_hand_worked_case_npv_payback_irr(db: Session) -> None:
    plan = _case(db)
    (tc,) = choice.area_choice(db, plan)
    by_kind = {r.option.kind: r for r in tc.comparison.results}
    assert set(by_kind) == {SAME_TYPE, RATED_FOR_VOLTAGE, RETROFIT}
    hand = _hand()
    for kind, flows in hand.items():
        r = by_kind[kind]
        assert r.plan.plan.interval_h is None  # spot only, as argued above
        # Life-cycle cost: numpy-financial's NPV of the hand-built flows (renewal t/mu exact;
        # the service's numerical renewal solve of the exponential agrees closely).
        assert r.life_cycle_cost == pytest.approx(npf.npv(RATE, flows), rel=1e-6)
    base = hand[SAME_TYPE]
    led = by_kind[RETROFIT]
    saving = [b - c for b, c in zip(base, hand[RETROFIT], strict=True)]
    assert led.irr == pytest.approx(npf.irr(saving), rel=1e-6)
    assert led.simple_payback_years == pytest.approx(-saving[0] / saving[1], rel=1e-6)
    # Light: 1,500 lm against 1,600 lm design, exponential to 70 % at 25,000 h, averaged over
    # 30,000 h: (1500/1600) x (1 - exp(-a 30000)) / (a 30000), a = ln(1/0.7)/25000.
    a = math.log(1 / 0.7) / 25_000.0
    hand_light = 1500 / 1600 * (1 - math.exp(-a * 30_000)) / (a * 30_000)
    assert led.mean_light_fraction == pytest.approx(hand_light, rel=1e-3)
    assert led.simple_payback_years == pytest.approx(0.13, abs=0.01)  # the comment's figure
    # Energy saved: (106.75 - 14) W x 10 x 3000 h x 10 years; CO2 at 0.4 kg/kWh.
    kwh = (100 * (125 / 120) ** 1.6 - 14.0) * 10 * B_H / 1000 * YEARS
    assert led.energy_saved_kwh == pytest.approx(kwh, rel=1e-9)
    assert led.co2_saved_kg == pytest.approx(kwh * CO2, rel=1e-9)
    # Watts at 125 V: the V^1.6 power law on each lamp.
    assert by_kind[SAME_TYPE].watts_per_unit == pytest.approx(100 * (125 / 120) ** 1.6)
    assert by_kind[RATED_FOR_VOLTAGE].watts_per_unit == pytest.approx(100 * (125 / 130) ** 1.6)
    # Ordering from the hand figures: the LED is cheapest over 10 years, then the 130 V lamp.
    assert tc.comparison.best is led
    assert led.life_cycle_cost < by_kind[RATED_FOR_VOLTAGE].life_cycle_cost
    assert by_kind[RATED_FOR_VOLTAGE].life_cycle_cost < by_kind[SAME_TYPE].life_cycle_cost
    b130 = by_kind[RATED_FOR_VOLTAGE]
    hand_saving = npf.npv(RATE, base) - npf.npv(RATE, hand[RATED_FOR_VOLTAGE])
    assert b130.saving_npv == pytest.approx(hand_saving, rel=1e-6)


def test_light_floor_marks_the_dim_130_v_lamp(db: Session) -> None:
    # At 125 V the 130 V lamp starts at (125/130)^3.4 = 0.875 of its rated light and only
    # loses light from there: below a 0.9 floor of the design light (1,600 lm per position).
    plan = _case(db, floor=0.9)
    (tc,) = choice.area_choice(db, plan)
    b130 = next(r for r in tc.comparison.results if r.option.kind == RATED_FOR_VOLTAGE)
    assert b130.mean_light_fraction is not None
    assert b130.mean_light_fraction < (125 / 130) ** 3.4
    assert b130.below_light_floor
    assert tc.comparison.best is not b130


def test_withdrawn_type_says_a_replacement_must_be_chosen(db: Session) -> None:
    plan = _case(db, withdrawn=True)
    (tc,) = choice.area_choice(db, plan)
    assert tc.comparison.replacement_required
    assert any("replacement must be chosen" in n for n in tc.comparison.notes)
    assert tc.comparison.best is not None
    assert tc.comparison.best.option.kind != SAME_TYPE
