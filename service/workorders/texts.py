"""Safety cautions and disposal printed on every order, fitted to its lamps, area and site.

The wording is advice: each text defers to local codes and licensed practice. Examples of
rules are cited by the site's region, taken from its time zone (sites carry no country):
"us" - OSHA 29 CFR 1910.147 (lockout), 29 CFR 1910 subpart D (walking-working surfaces),
40 CFR 273 (universal waste lamps), 40 CFR 761 (PCBs); "eu" (Europe/ zones) - EN 50110-1
(operation of electrical installations), Directive 2009/104/EC (work equipment, work at
height), Directive 2012/19/EU (WEEE: discharge and LED lamps), Directive 96/59/EC (PCBs)
[recalled from memory, not looked up here]; elsewhere no example is cited.
Per technology: hot glass for every filament lamp and HID; HID restrike cool-down; a metal
halide or mercury vapour lamp with a broken outer bulb can keep burning and emit harmful UV
[practice]. The PCB line prints only where magnetic-ballast lamps are on the order; the
height line whenever the area's mounting height reaches HEIGHT_CAUTION_M, whatever the
access method.
"""

from __future__ import annotations

from collections.abc import Iterable
from dataclasses import dataclass

HOT_TECHNOLOGIES = {
    "incandescent",
    "halogen",
    "metal_halide",
    "high_pressure_sodium",
    "mercury_vapour",
}
HID = {"metal_halide", "high_pressure_sodium", "mercury_vapour"}
UV_OUTER_BULB = {"metal_halide", "mercury_vapour"}
# Mounting height (metres) from which work is treated as work at height whatever the access:
# our threshold (common practice: above about 2 m a fall injures); local rules set their own.
HEIGHT_CAUTION_M = 2.0
_US_ZONE_PREFIXES = (
    "America/New_York",
    "America/Chicago",
    "America/Denver",
    "America/Los_Angeles",
    "America/Phoenix",
    "America/Anchorage",
    "America/Detroit",
    "America/Boise",
    "America/Indiana/",
    "America/Kentucky/",
    "America/North_Dakota/",
    "Pacific/Honolulu",
    "US/",
)
_CITE = {
    "us": {
        "lockout": " (in the US, for example, OSHA 29 CFR 1910.147)",
        "height": " (in the US, for example, OSHA 29 CFR 1910 subpart D)",
        "mercury": " (in the US, for example, 40 CFR 273)",
        "weee": "",
        "pcb": " (in the US, for example, 40 CFR 761)",
    },
    "eu": {
        "lockout": " (in Europe, for example, EN 50110-1)",
        "height": " (in the EU, for example, Directive 2009/104/EC)",
        "mercury": " (in the EU, for example, Directive 2012/19/EU on WEEE)",
        "weee": " (in the EU, Directive 2012/19/EU)",
        "pcb": " (in the EU, for example, Directive 96/59/EC)",
    },
}
_NONE = dict.fromkeys(("lockout", "height", "mercury", "weee", "pcb"), "")


def region_of(time_zone: str | None) -> str:
    """'us', 'eu' or '' (no examples cited) from a site's IANA time zone."""
    tz = time_zone or ""
    if tz.startswith(_US_ZONE_PREFIXES):
        return "us"
    if tz.startswith("Europe/"):
        return "eu"
    return ""


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


def disposal_instructions(lamps: Iterable[LampContent], *, region: str = "us") -> str:
    """How to dispose of the removed lamps, by what they contain and the site's region."""
    cite = _CITE.get(region, _NONE)
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
            f"under local rules{cite['mercury']}. A broken lamp: ventilate "
            "the room, do not vacuum, collect the pieces in a sealed container."
        )
    if led:
        lines.append(
            f"LED lamps ({', '.join(led)}): electronic waste; recycle under local e-waste "
            f"rules{cite['weee']}."
        )
    if plain:
        lines.append(
            f"Filament lamps ({', '.join(plain)}): no hazardous content; wrap the glass and "
            "recycle or discard under local rules."
        )
    if any(x.technology in BALLASTED for x in items):
        lines.append(
            "Old magnetic ballasts found during the work may contain PCBs: keep them apart and "
            f"dispose of them under local rules{cite['pcb']}."
        )
    return "\n".join(lines)


def safety_cautions(
    lamps: Iterable[LampContent],
    access_method: str,
    *,
    mounting_height_m: float | None = None,
    region: str = "us",
) -> str:
    """Cautions for the team, by lamp technology, height, access and region (advice only)."""
    cite = _CITE.get(region, _NONE)
    items = list(lamps)
    techs = {x.technology for x in items}
    lines = [
        "Switch off, lock out and verify the circuit dead before working on a fixture, ballast "
        f"or driver, as local electrical safety rules require{cite['lockout']}. Wiring and "
        "ballast work is for qualified, licensed people."
    ]
    if techs & HOT_TECHNOLOGIES:
        lines.append(
            "Let lamps cool first: filament bulbs, halogen capsules and HID bulbs stay hot "
            "enough to burn skin."
        )
    if techs & HID:
        lines.append(
            "HID lamps do not restrike while hot: after switching off allow several minutes "
            "to cool before testing the new lamp."
        )
    if techs & UV_OUTER_BULB:
        lines.append(
            "A metal halide or mercury vapour lamp with a broken or missing outer bulb can keep "
            "burning and emit harmful ultraviolet: switch it off at once and keep people away "
            "until it is removed."
        )
    high = mounting_height_m is not None and mounting_height_m >= HEIGHT_CAUTION_M
    if access_method in {"ladder", "scaffold", "lift"} or high:
        where = f"{mounting_height_m:g} m" if mounting_height_m is not None else access_method
        lines.append(
            f"Work at height ({where}, {access_method}): follow local fall-protection "
            f"rules{cite['height']}; inspect the equipment before use."
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
