"""A plain landing page: what the service is, where the API docs are, and the cautions."""

from __future__ import annotations

from fastapi import APIRouter
from fastapi.responses import HTMLResponse

from service import __version__

router = APIRouter(tags=["probes"])

SAFETY_CAUTIONS: tuple[str, ...] = (
    "Switch off, lock out and verify the circuit dead before working on a fixture, ballast or "
    "driver, as local electrical safety rules require (in the US, for example, OSHA 29 CFR "
    "1910.147). Wiring and ballast work is for qualified, licensed people. Old magnetic "
    "ballasts may contain PCBs: keep them apart and dispose of them under local rules.",
    "Let lamps cool before handling: halogen capsules and HID bulbs stay hot enough to burn skin.",
    "Ladders, scaffolds and lifts: follow local fall-protection rules.",
    "Lamps containing mercury (fluorescent, CFL, HID) must not go in general waste: store them "
    "intact in closed, labelled packaging and recycle them under local hazardous or universal "
    "waste rules (in the US, for example, 40 CFR 273). If one breaks: ventilate, do not vacuum, "
    "collect the pieces in a sealed container.",
    "Metal halide lamps can rupture at end of life: in open fixtures use only lamps rated for "
    "open fixtures, relamp them as a group at or before rated life, and switch lamps that burn "
    "around the clock off for at least 15 minutes once a week (common practice).",
    "This service advises; local codes and licensed practice decide.",
)


@router.get("/", response_class=HTMLResponse, include_in_schema=False)
def home() -> str:
    """The landing page."""
    items = "\n".join(f"<li>{c}</li>" for c in SAFETY_CAUTIONS)
    return f"""<!doctype html>
<html lang="en"><head><meta charset="utf-8"><title>LampKeeper</title>
<style>body{{font:16px/1.5 system-ui,sans-serif;max-width:46rem;margin:2rem auto;padding:0 1rem}}
.caution{{border:2px solid #444;padding:.5rem 1rem}}</style></head>
<body><h1>LampKeeper {__version__}</h1>
<p>Lamp register, burnout and light-loss forecasts, group-relamp plans and work orders.</p>
<p>API documentation: <a href="/docs">/docs</a> (OpenAPI: <a href="/openapi.json">/openapi.json</a>).
Every API call needs a key: <code>Authorization: Bearer &lt;key&gt;</code>.</p>
<section class="caution"><h2>Before any relamping work</h2><ul>
{items}
</ul></section></body></html>"""
