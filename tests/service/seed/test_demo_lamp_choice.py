"""The demo's lamp choices: the hall over-voltage fix and the office's withdrawn T8."""

from __future__ import annotations

from pathlib import Path

from sqlalchemy import select
from sqlalchemy.orm import Session

from service.planning import choice, service
from service.register.models import Area
from service.seed.loader import load_demo


def _choices(db: Session, area_name: str) -> list[choice.TypeChoice]:
    area = db.scalar(select(Area).where(Area.name == area_name))
    assert area is not None
    plan = service.area_plan(db, area.id, last_relamps=lambda _s, _i: {})
    return choice.area_choice(db, plan)


def test_demo_hall_recommends_higher_rated_or_led_lamps_with_a_payback(
    db: Session, tmp_path: Path
) -> None:
    summary = load_demo(db, key_file=tmp_path / "key.txt")
    assert summary.counts["retrofit_options"] == 3
    for area in ("Foyer pendants", "Auditorium house lights"):
        (tc,) = _choices(db, area)
        kinds = [r.option.kind for r in tc.comparison.results]
        assert kinds == ["same_type", "rated_for_voltage", "retrofit"], area
        best = tc.comparison.best
        assert best is not None and best.option.kind in ("rated_for_voltage", "retrofit")
        # A fix for 124-126 V circuits pays for itself well inside the 10-year horizon.
        assert best.simple_payback_years is not None and best.simple_payback_years < 10
        assert best.saving_npv > 0
        assert not best.below_light_floor


def test_demo_office_t8_is_withdrawn_with_a_priced_retrofit(db: Session, tmp_path: Path) -> None:
    load_demo(db, key_file=tmp_path / "key.txt")
    (tc,) = _choices(db, "Floor 1 open office")
    assert tc.comparison.replacement_required
    same, led = tc.comparison.results
    assert same.option.withdrawn and "EU" in same.option.withdrawn
    assert led.option.kind == "retrofit" and led.option.costs.lamp_price > 0
    assert tc.comparison.best is led
