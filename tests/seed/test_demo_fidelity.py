"""The demo shows the model's fidelity features: TM-21 at the cap, an HID supply fault."""

from __future__ import annotations

from pathlib import Path

import numpy as np
from sqlalchemy import select
from sqlalchemy.orm import Session

from service.catalogue.lamp_model import resolve_lamp_model
from service.catalogue.models import LampType
from service.forecasting.fit import load_fitted_types
from service.forecasting.service import forecast
from service.register.models import Area
from service.reliability.fleet import evaluate_fleet
from service.seed.loader import load_demo


def test_demo_led_reads_its_l70_at_the_tm21_cap(db: Session, tmp_path: Path) -> None:
    # IES TM-21-11: a 10,000 h LM-80 test of 25 units reports no further than 6 x 10,000 h.
    load_demo(db, key_file=tmp_path / "key.txt")
    db.commit()
    led = db.scalars(select(LampType).where(LampType.code == "LK-LED-PNL40")).one()
    model = resolve_lamp_model(led)
    assert model.lumen_life_label == "L70(10k) > 60,000 h"
    assert model.tm21 is not None and model.tm21.capped[70]
    assert "assumption" in model.sources["failure_life_h"]


def test_demo_ramp_has_a_supply_fault_and_no_life_credit(db: Session, tmp_path: Path) -> None:
    # Common practice: HPS on a reactor ballast 9 % under its 277 V rating
    # is a supply fault; the far poles are counted per area and get no life credit.
    load_demo(db, key_file=tmp_path / "key.txt")
    db.commit()
    ramp = db.scalars(select(Area).where(Area.name == "Entry ramp and perimeter")).one()
    fc = forecast(db, area_id=ramp.id, horizon_weeks=4)
    # RAMP-16..18 read only the low supply; RAMP-15 also has the October reading, and the
    # supply ahead is the burn-hour-weighted mean of its readings (268 V, inside the band).
    assert fc.areas[0].summary.supply_faults == 3
    faulty = fc.positions.fleet.warn_supply_fault
    # No life credit: the same life factor as at rated voltage (switching alone).
    ages = fc.positions.ages
    types = load_fitted_types(db, ages.lamp_type_id, ballast_kinds=ages.ballast_kind)
    k = types.index(ages.lamp_type_id, ages.ballast_kind)
    rated = evaluate_fleet(types.table, k, ages.age_h, np.nan, ages.hours_per_start, 0.0)
    assert faulty.sum() == 3
    np.testing.assert_allclose(fc.positions.fleet.life_factor[faulty], rated.life_factor[faulty])
