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


# How a history file's cells become values: "text", "text?" (empty is None), "int",
# "float", "float?" (empty is None), "when" (ISO 8601, moved by the shift), "flag" (true).
REMOVAL_COLUMNS = {
    "site": "text", "tag": "text", "position_no": "int", "installed_at": "when",
    "removed_at": "when", "burn_hours": "float", "starts": "float?", "failed": "flag",
    "reason": "text",
}  # fmt: skip
BURNOUT_COLUMNS = {
    "site": "text", "tag": "text", "position_no": "int", "reported_at": "when",
    "burn_hours": "float?", "note": "text?",
}  # fmt: skip
BURN_HOUR_COLUMNS = {
    "site": "text", "area": "text", "tag": "text?", "period_start": "when",
    "period_end": "when", "hours": "float", "starts": "float?",
}  # fmt: skip
VOLTAGE_COLUMNS = {
    "site": "text", "area": "text", "tag": "text?", "measured_at": "when", "volts": "float",
    "note": "text?",
}  # fmt: skip


def _cell(kind: str, text: str, shift: timedelta) -> Any:
    """One cell as its column kind says (hours and volts as floats)."""
    if kind == "text":
        return text
    if kind == "text?":
        return text or None
    if kind == "int":
        return int(text)
    if kind == "float":
        return float(text)
    if kind == "float?":
        return _num(text)
    if kind == "when":
        return _when(text, shift)
    return text.strip().lower() == "true"  # "flag"


def _history(path: Path, columns: dict[str, str], shift: timedelta) -> Rows:
    """A history file's rows with each column converted (an absent file is no rows)."""
    return [{k: _cell(kind, r[k], shift) for k, kind in columns.items()} for r in _csv(path)]


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
        removals=_history(root / REMOVALS, REMOVAL_COLUMNS, shift),
        burnouts=_history(root / BURNOUTS, BURNOUT_COLUMNS, shift),
        burn_hours=_history(root / BURN_HOURS, BURN_HOUR_COLUMNS, shift),
        voltages=_history(root / VOLTAGES, VOLTAGE_COLUMNS, shift),
    )
