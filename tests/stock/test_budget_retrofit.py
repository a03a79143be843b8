"""The budget's retrofit split against a hand-worked case (invented figures).

Ten one-lamp fixtures of a 120 V 100 W incandescent measured at 125 V, 3,000 burn hours a
year (57.495 h a week), tariff 0.15 a kWh, labour 40 an hour, 6 minutes a lamp group and
spot, an equipment hire of 30.00 a visit, cleaning 3 minutes a lamp (the budget's input).
Life shape 1 (exponential) with equal group and spot costs: a block replacement never pays
(C(T) = c/T + c/mu > c/mu [published: Cox, Renewal Theory]), so every option is spot only
and the lamp choice fits its pick at once (time 0 = today, planning.lamp_choice).
The retrofit offered: an LED lamp per position, kit 8.00, 10 minutes, rebate 2.00, 14 W,
B10 = L70 = 25,000 h with failure shape 1, so eta = 25000 / -ln(0.9) = 237,280 h and
M(t) = t / eta exactly. Against the same lamp (106.75 W at 125 V by the V^1.6 power law,
3.5 spot lamps a position-year at 35.00 each with the hire) the LED is the cheaper choice.

Hand figures, budget from 2026-06-01 (Chicago) for 12 months (365 days):
- retrofit, 2026-06: lamps 10 x 8.00 = 80.00; labour 10 x 10/60 x 40 = 66.67; hire one
  visit 30.00; disposal 0 (no mercury); cleaning 10 x 3/60 x 40 = 20.00; rebate -20.00.
- energy: 10 x 14 W x 3000 h x 365/365.25 / 1000 = 419.71 kWh x 0.15 = 62.96 (the lamp
  left in would be 10 x 100 x (125/120)^1.6 W: 1067.5 W x 2997.9 h = 3200.3 kWh, 480.04).
- spot: only the LEDs' failures, 10 x 2997.9 / 237,280 = 0.1263 lamps over the year, each
  8.00 kit + 10/60 x 40 labour + 30.00 hire: lamps 1.01, labour 0.84, hire 3.79.
- group: nothing (spot only).
"""

from __future__ import annotations

import math
from datetime import UTC, datetime, timedelta

import pytest
from sqlalchemy.orm import Session

from service.catalogue.models import RetrofitOption
from service.db.base import utcnow
from service.planning import service
from service.stock import budget
from tests import factories as fx

AT = datetime(2026, 6, 1, 12, 0, tzinfo=UTC)
B_H = 3000.0  # burn hours a year
YEAR_H = B_H * 365 / 365.25  # burn hours in the budget's 365 days


def _case(db: Session) -> tuple[object, RetrofitOption]:
    s = fx.site(db, "Retrofit Budget Works", time_zone="America/Chicago", nominal_voltage_v=120.0)
    s.energy_price_per_kwh = 0.15
    s.labour_rate_per_h = 40.0
    a = fx.area(
        db, s, "Print Hall", hours_per_day=None, days_per_week=None,
        weekly_burn_hours=B_H / service.WEEKS_PER_YEAR, group_minutes_per_lamp=6.0,
        spot_minutes_per_lamp=6.0, equipment_hire_per_visit=30.0,
    )  # fmt: skip
    lt = fx.lamp_type(
        db, "GS-100-120R", rated_volts=120.0, unit_price=1.0, rated_watts=100.0,
        rated_life_h=1000.0, weibull_shape=1.0, life_exponent=13.0, light_exponent=3.4,
        power_exponent=1.6, initial_lumens=1600.0,
    )  # fmt: skip
    fx.fixtures(db, a, lt, 10, installed_at=AT - timedelta(days=10), measured_voltage_v=125.0)
    opt = RetrofitOption(
        code="LED-A19-14R", kind="led_lamp", lamp_type_id=lt.id, kit_cost_per_unit=8.0,
        labour_minutes_per_unit=10.0, rebate_per_unit=2.0, watts_per_unit=14.0,
        lumens_per_unit=1500.0, l70_h=25_000.0, failure_b10_h=25_000.0, failure_shape=1.0,
    )  # fmt: skip
    db.add(opt)
    db.flush()
    return s, opt


def _rows(db: Session, s: object) -> list[budget.Row]:
    return budget.site_budget(
        db, s, last_relamps=lambda _s, _ids: {}, at=AT, cleaning_minutes_per_lamp=3.0
    )  # type: ignore[arg-type]


def _sum(rows: list[budget.Row], **want: str) -> float:
    return sum(r.amount for r in rows if all(getattr(r, k) == v for k, v in want.items()))


def test_retrofit_booked_at_the_relamp_and_energy_at_its_watts(db: Session) -> None:
    s, _ = _case(db)
    rows = _rows(db, s)
    june = {r.category: r.amount for r in rows if r.split == "retrofit" and r.month == "2026-06"}
    assert june == {
        "lamps": 80.00, "labour": 66.67, "hire": 30.00, "disposal": 0.00, "cleaning": 20.00,
        "rebate": -20.00,
    }  # fmt: skip
    later = [r for r in rows if r.split == "retrofit" and r.month != "2026-06"]
    assert len(later) == 11 * 6 and all(r.amount == 0.0 for r in later)
    assert _sum(rows, split="group") == 0.0
    # Energy at 14 W from today: 62.96 over the year (months rounded to cents each).
    assert _sum(rows, category="energy") == pytest.approx(10 * 14 * YEAR_H / 1000 * 0.15, abs=0.06)
    # Spot: the LEDs' renewals only, M(t) = t / eta (exponential, exact).
    eta = 25_000.0 / -math.log(0.9)
    lamps = 10 * YEAR_H / eta
    assert _sum(rows, split="spot", category="lamps") == pytest.approx(8.0 * lamps, abs=0.06)
    assert _sum(rows, split="spot", category="hire") == pytest.approx(30.0 * lamps, abs=0.06)


def test_without_the_option_no_retrofit_and_the_old_watts(db: Session) -> None:
    s, opt = _case(db)
    opt.retired_at = utcnow()
    db.flush()
    rows = _rows(db, s)
    assert _sum(rows, split="retrofit") == 0.0
    watts = 10 * 100 * (125 / 120) ** 1.6  # the V^1.6 power law, as in the hand case
    assert _sum(rows, category="energy") == pytest.approx(watts * YEAR_H / 1000 * 0.15, abs=0.06)
    # The old lamps' spot burnouts: 3,000 / mu a position-year, mu = 1000/ln 2 x (120/125)^13.
    mu = 1000.0 / math.log(2.0) * (120.0 / 125.0) ** 13
    spot = 10 * YEAR_H / mu
    assert _sum(rows, split="spot", category="lamps") == pytest.approx(spot * 1.0, rel=0.02)
