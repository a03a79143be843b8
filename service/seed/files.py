"""Reading the demo scenario's data files (seed_data/) into plain, validated rows.

Every timestamp in the files is moved by whole days so that the scenario's `as_of` date
lands on the day it is loaded: lamp ages stay as the files describe them, whenever the
demo is loaded.
"""

from __future__ import annotations

import csv
import json
import os
from dataclasses import dataclass, field
from datetime import UTC, date, datetime, timedelta
from pathlib import Path
from typing import Any

from pydantic import BaseModel, ValidationError

from service.api.errors import Invalid
from service.register.schemas import AreaFields, FixtureCreate, SiteCreate

SCENARIO = "scenario.json"
LAMP_TYPES = "lamp_types.json"
FIXTURES = "fixtures.csv"
REMOVALS = "removals.csv"
BURNOUTS = "burnouts.csv"
BURN_HOURS = "burn_hours.csv"
VOLTAGES = "voltages.csv"


def seed_dir() -> Path:
    """Where the data files are: LAMPKEEPER_SEED_DIR, the source tree, or ./seed_data."""
    env = os.environ.get("LAMPKEEPER_SEED_DIR")
    if env:
        return Path(env)
    beside_source = Path(__file__).resolve().parents[2] / "seed_data"
    if (beside_source / SCENARIO).is_file():
        return beside_source
    return Path.cwd() / "seed_data"


@dataclass
class Scenario:
    """The demo scenario as rows ready for insertion (dates already shifted)."""

    organisation: str
    sites: list[dict[str, Any]]
    areas: list[dict[str, Any]]  # each with "site" (name)
    lamp_types: list[dict[str, Any]]
    fixtures: list[dict[str, Any]]  # each with "site", "area", "lamp_type_code"
    removals: list[dict[str, Any]] = field(default_factory=list)
    burnouts: list[dict[str, Any]] = field(default_factory=list)
    burn_hours: list[dict[str, Any]] = field(default_factory=list)
    voltages: list[dict[str, Any]] = field(default_factory=list)


def _check(schema: type[BaseModel], raw: dict[str, Any], where: str) -> BaseModel:
    # The same rules as the API: a broken data file fails loudly, naming the row and field.
    try:
        return schema.model_validate(raw)
    except ValidationError as exc:
        errors = [
            {"field": ".".join(str(p) for p in e["loc"]), "in": where, "message": e["msg"]}
            for e in exc.errors()
        ]
        raise Invalid(f"Demo data {where} is invalid.", errors=errors) from exc


def _csv(path: Path) -> list[dict[str, str]]:
    if not path.is_file():
        return []
    with path.open(newline="", encoding="utf-8") as f:
        return list(csv.DictReader(f))


def _when(text: str, shift: timedelta) -> datetime:
    value = datetime.fromisoformat(text.replace("Z", "+00:00"))
    if value.tzinfo is None:
        value = value.replace(tzinfo=UTC)
    return value + shift


def _num(text: str) -> float | None:
    return None if text.strip() == "" else float(text)


def _lamp_type_values(raw: dict[str, Any], where: str) -> dict[str, Any]:
    """Validate a lamp type with the catalogue's own schema when that domain is present."""
    try:
        from service.catalogue import schemas as cat
    except ImportError:  # catalogue API not built yet: store the file's values as they are
        return dict(raw)
    model = _check(cat.LampTypeCreate, raw, where)
    values: dict[str, Any] = model.stored_values()  # type: ignore[attr-defined]
    problems = cat.cross_check(values) if hasattr(cat, "cross_check") else []
    if problems:
        errors = [{"field": f, "in": where, "message": m} for f, m in problems]
        raise Invalid(f"Demo data {where} is invalid.", errors=errors)
    return values


Rows = list[dict[str, Any]]


def _sites_and_areas(doc: dict[str, Any]) -> tuple[Rows, Rows]:
    """The scenario's sites and their areas (each area names its site), validated."""
    sites: Rows = []
    areas: Rows = []
    for i, raw_site in enumerate(doc["sites"]):
        site = {k: v for k, v in raw_site.items() if k != "areas"}
        sites.append(_check(SiteCreate, site, f"{SCENARIO} sites[{i}]").model_dump())
        for j, raw_area in enumerate(raw_site.get("areas", [])):
            area = _check(AreaFields, raw_area, f"{SCENARIO} sites[{i}].areas[{j}]")
            areas.append({"site": site["name"], **area.model_dump()})
    return sites, areas


def _fixtures(path: Path, shift: timedelta) -> Rows:
    """fixtures.csv in the fixture import's columns, validated by FixtureCreate."""
    fixtures = []
    for n, row in enumerate(_csv(path), start=2):  # row 1 is the header
        body = {
            "area_id": 1,  # placeholder ids (valid, unused): resolved from the names at load
            "lamp_type_id": 1,
            "tag": row["tag"],
            "location": row["location"] or None,
            "lamps_per_fixture": int(row["lamps_per_fixture"]),
            "ballast_kind": row["ballast_kind"],
            "measured_voltage_v": _num(row["measured_voltage_v"]),
            "installed_on": row["installed_on"] or None,
            "lamps_installed_at": row["lamps_installed_at"],
            "lamp_hours_at_install": float(row["lamp_hours_at_install"] or 0),
            "lamp_starts_at_install": float(row["lamp_starts_at_install"] or 0),
        }
        fx = _check(FixtureCreate, body, f"{FIXTURES} row {n}")
        values = fx.model_dump(exclude={"area_id", "lamp_type_id"})
        if values["installed_on"] is not None:
            values["installed_on"] = values["installed_on"] + shift
        values["lamps_installed_at"] = _when(row["lamps_installed_at"], shift)
        fixtures.append(
            {"site": row["site"], "area": row["area"], "lamp_type_code": row["lamp_type"]} | values
        )
    return fixtures


def _removal(r: dict[str, str], shift: timedelta) -> dict[str, Any]:
    return {
        "site": r["site"],
        "tag": r["tag"],
        "position_no": int(r["position_no"]),
        "installed_at": _when(r["installed_at"], shift),
        "removed_at": _when(r["removed_at"], shift),
        "burn_hours": float(r["burn_hours"]),  # hours
        "starts": _num(r["starts"]),
        "failed": r["failed"].strip().lower() == "true",
        "reason": r["reason"],
    }


def _burnout(r: dict[str, str], shift: timedelta) -> dict[str, Any]:
    return {
        "site": r["site"],
        "tag": r["tag"],
        "position_no": int(r["position_no"]),
        "reported_at": _when(r["reported_at"], shift),
        "burn_hours": _num(r["burn_hours"]),
        "note": r["note"] or None,
    }


def _burn_hours(r: dict[str, str], shift: timedelta) -> dict[str, Any]:
    return {
        "site": r["site"],
        "area": r["area"],
        "tag": r["tag"] or None,
        "period_start": _when(r["period_start"], shift),
        "period_end": _when(r["period_end"], shift),
        "hours": float(r["hours"]),
        "starts": _num(r["starts"]),
    }


def _voltage(r: dict[str, str], shift: timedelta) -> dict[str, Any]:
    return {
        "site": r["site"],
        "area": r["area"],
        "tag": r["tag"] or None,
        "measured_at": _when(r["measured_at"], shift),
        "volts": float(r["volts"]),
        "note": r["note"] or None,
    }


def read_scenario(directory: Path | None = None, today: date | None = None) -> Scenario:
    """Read and validate every data file; timestamps shifted so `as_of` becomes today."""
    root = directory or seed_dir()
    if not (root / SCENARIO).is_file():
        raise Invalid(f"No demo scenario at {root / SCENARIO}; set LAMPKEEPER_SEED_DIR.")
    doc = json.loads((root / SCENARIO).read_text(encoding="utf-8"))
    as_of = date.fromisoformat(doc["as_of"])
    shift = timedelta(days=((today or datetime.now(UTC).date()) - as_of).days)
    sites, areas = _sites_and_areas(doc)
    lamp_docs = json.loads((root / LAMP_TYPES).read_text(encoding="utf-8"))
    return Scenario(
        organisation=doc["organisation"],
        sites=sites,
        areas=areas,
        lamp_types=[
            _lamp_type_values(raw, f"{LAMP_TYPES}[{i}]") for i, raw in enumerate(lamp_docs)
        ],
        fixtures=_fixtures(root / FIXTURES, shift),
        removals=[_removal(r, shift) for r in _csv(root / REMOVALS)],
        burnouts=[_burnout(r, shift) for r in _csv(root / BURNOUTS)],
        burn_hours=[_burn_hours(r, shift) for r in _csv(root / BURN_HOURS)],
        voltages=[_voltage(r, shift) for r in _csv(root / VOLTAGES)],
    )
