"""Cautions fitted to the order: technology, ballast, height and the site's region.

Sources named beside each check: common practice for the trade cautions, and the rules each region
cites as examples (recalled from memory: OSHA 29 CFR 1910.147, 40 CFR 273 and 761; EN 50110-1,
Directives 2009/104/EC, 2012/19/EU, 96/59/EC).
"""

from __future__ import annotations

from service.workorders.texts import (
    LampContent,
    disposal_instructions,
    region_of,
    safety_cautions,
)

INC = LampContent("INC-60", "incandescent", False, False)
LED = LampContent("LED-9", "led", False, False)
MH = LampContent("MH-400", "metal_halide", True, True)
MV = LampContent("MV-250", "mercury_vapour", True, False)


def test_hot_glass_on_incandescent_orders() -> None:
    # Common practice: filament bulbs are hot enough to burn skin, not only halogen and HID.
    assert "Let lamps cool" in safety_cautions([INC], "floor")
    assert "Let lamps cool" not in safety_cautions([LED], "floor")


def test_broken_outer_bulb_uv_on_metal_halide_and_mercury_only() -> None:
    # Common practice: a broken outer bulb can keep the arc tube burning and emit UV.
    for lamp in (MH, MV):
        text = safety_cautions([lamp], "lift")
        assert "ultraviolet" in text and "switch it off at once" in text
        assert "restrike" in text  # HID restrike cool-down
    assert "ultraviolet" not in safety_cautions([INC, LED], "lift")


def test_pcb_line_only_where_a_ballast_exists() -> None:
    assert "PCB" not in disposal_instructions([INC, LED])
    assert "PCB" in disposal_instructions([MH])


def test_region_chooses_the_examples_cited() -> None:
    assert region_of("Europe/Lisbon") == "eu" and region_of("America/Chicago") == "us"
    assert region_of("America/Toronto") == "" and region_of(None) == ""
    eu = safety_cautions([MH], "lift", region="eu") + disposal_instructions([MH], region="eu")
    us = safety_cautions([MH], "lift", region="us") + disposal_instructions([MH], region="us")
    assert "EN 50110-1" in eu and "2012/19/EU" in eu and "96/59/EC" in eu and "CFR" not in eu
    assert "1910.147" in us and "40 CFR 273" in us and "40 CFR 761" in us and "EU" not in us
    other = safety_cautions([MH], "lift", region="") + disposal_instructions([MH], region="")
    assert "CFR" not in other and "Directive" not in other
    assert "local codes and licensed practice decide" in other


def test_height_caution_from_the_mounting_height_whatever_the_access() -> None:
    # The case: a 2.4 m area reached from the floor gets the height caution.
    assert "Work at height (2.4 m, floor)" in safety_cautions([LED], "floor", mounting_height_m=2.4)
    assert "Work at height" not in safety_cautions([LED], "floor", mounting_height_m=1.8)
    assert "Work at height" in safety_cautions([LED], "ladder")
