"""Safety cautions and disposal printed on every order (OSHA 29 CFR 1910.147, 40 CFR 273).

The wording is advice: each text defers to local codes and licensed practice.
"""

from __future__ import annotations

from collections.abc import Iterable
from dataclasses import dataclass

HOT_TECHNOLOGIES = {"halogen", "metal_halide", "high_pressure_sodium", "mercury_vapour"}
BALLASTED = {
    "linear_fluorescent",
    "compact_fluorescent",
    "metal_halide",
    "high_pressure_sodium",
    "mercury_vapour",
}


@dataclass(frozen=True)
class LampContent:
    """What a lamp type holds, as far as disposal and safety care."""

    code: str
    technology: str
    contains_mercury: bool
    rupture_risk: bool


def disposal_instructions(lamps: Iterable[LampContent]) -> str:
    """How to dispose of the removed lamps, by what they contain."""
    items = list(lamps)
    lines: list[str] = []
    mercury = sorted({x.code for x in items if x.contains_mercury})
    led = sorted({x.code for x in items if x.technology == "led" and not x.contains_mercury})
    plain = sorted(
        {x.code for x in items if x.technology in {"incandescent", "halogen"}} - set(mercury)
    )
    if mercury:
        lines.append(
            f"Mercury-containing lamps ({', '.join(mercury)}): never in general waste. Store "
            "intact in closed, labelled packaging and recycle as universal or hazardous waste "
            "under local rules (in the US, for example, 40 CFR 273). A broken lamp: ventilate "
            "the room, do not vacuum, collect the pieces in a sealed container."
        )
    if led:
        lines.append(
            f"LED lamps ({', '.join(led)}): electronic waste; recycle under local e-waste rules."
        )
    if plain:
        lines.append(
            f"Filament lamps ({', '.join(plain)}): no hazardous content; wrap the glass and "
            "recycle or discard under local rules."
        )
    lines.append(
        "Old magnetic ballasts found during the work may contain PCBs: keep them apart and "
        "dispose of them under local rules."
    )
    return "\n".join(lines)


def safety_cautions(lamps: Iterable[LampContent], access_method: str) -> str:
    """Cautions for the team, by lamp technology and access method (advice only)."""
    items = list(lamps)
    techs = {x.technology for x in items}
    lines = [
        "Switch off, lock out and verify the circuit dead before working on a fixture, ballast "
        "or driver, as local electrical safety rules require (in the US, for example, OSHA "
        "29 CFR 1910.147). Wiring and ballast work is for qualified, licensed people."
    ]
    if techs & HOT_TECHNOLOGIES:
        lines.append("Let lamps cool first: halogen capsules and HID bulbs can burn skin.")
    if access_method in {"ladder", "scaffold", "lift"}:
        lines.append(
            f"Work at height ({access_method}): follow local fall-protection rules; inspect the "
            "equipment before use."
        )
    if any(x.rupture_risk for x in items):
        lines.append(
            "Metal halide lamps can rupture at end of life: in open fixtures use only lamps rated "
            "for open fixtures; relamp them as a group at or before rated life; lamps burning "
            "around the clock are commonly switched off for at least 15 minutes once a week."
        )
    if techs & BALLASTED or any(x.contains_mercury for x in items):
        lines.append("Handle mercury-containing lamps gently and keep them intact (see disposal).")
    lines.append("LampKeeper advises; local codes and licensed practice decide.")
    return "\n".join(lines)
