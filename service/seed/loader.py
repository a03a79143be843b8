"""Loading the invented demo scenario, and the demo API key the `make run` banner prints.

Everything goes in with Core bulk inserts inside the caller's transaction (flush, never
commit): all of the scenario or none of it. Domains that are not in the database yet (no
table) are skipped, so the loader works at any stage of the schema.
"""

from __future__ import annotations

import os
from dataclasses import dataclass, field
from datetime import date
from pathlib import Path
from typing import Any

from sqlalchemy import Table, func, insert, inspect, select
from sqlalchemy.orm import Session

import service.db.models  # noqa: F401  (registers every domain's tables on Base.metadata)
from service.api.errors import Conflict
from service.catalogue.model import resolve_lamp_model
from service.catalogue.models import LampType
from service.db.base import Base, utcnow
from service.events.models import BurnoutReport, LampRemoval
from service.keys import service as keys
from service.keys.models import ApiKey
from service.register.models import Area, Fixture, LampPosition, Site
from service.reliability.conditions import voltage_effect
from service.seed.files import Scenario, read_scenario

# The demo key's secret lives only here (the database keeps its hash); var/ is gitignored.
DEFAULT_KEY_FILE = Path("var") / "demo-key.txt"
DEMO_KEY_NAME = "demo"


@dataclass
class DemoSummary:
    """What a demo load did: row counts per table, or why it loaded nothing."""

    loaded: bool
    reason: str
    organisation: str = ""
    counts: dict[str, int] = field(default_factory=dict)
    key: str | None = None
    key_file: Path | None = None


def key_file_path(key_file: Path | None = None) -> Path:
    """The demo key file: the argument, LAMPKEEPER_DEMO_KEY_FILE, else var/demo-key.txt."""
    if key_file is not None:
        return key_file
    env = os.environ.get("LAMPKEEPER_DEMO_KEY_FILE")
    return Path(env) if env else DEFAULT_KEY_FILE


def _has_table(session: Session, name: str) -> bool:
    return inspect(session.connection()).has_table(name)


def _bulk(session: Session, table: Table, rows: list[dict[str, Any]]) -> int:
    """Insert rows with one executemany, keeping only the table's own columns."""
    if not rows:
        return 0
    names = set(table.c.keys())
    session.execute(insert(table), [{k: v for k, v in r.items() if k in names} for r in rows])
    return len(rows)


def _demo_site_names(session: Session, names: list[str]) -> list[str]:
    return list(session.scalars(select(Site.name).where(Site.name.in_(names))))


def demo_loaded(session: Session, scenario: Scenario | None = None) -> bool:
    """True when the demo's sites are in the database."""
    sc = scenario or read_scenario()
    return bool(_demo_site_names(session, [s["name"] for s in sc.sites]))


def load_demo(
    session: Session,
    *,
    if_empty: bool = False,
    key_file: Path | None = None,
    seed_directory: Path | None = None,
    today: date | None = None,
) -> DemoSummary:
    """Load the demo scenario in one transaction and create the demo admin key."""
    sc = read_scenario(seed_directory, today)
    if if_empty and session.scalar(select(func.count()).select_from(Site)):
        return DemoSummary(False, "the database already has sites", sc.organisation)
    clash = _demo_site_names(session, [s["name"] for s in sc.sites])
    if clash:
        raise Conflict(f"The demo is already loaded (site '{clash[0]}' exists).", field="name")
    codes = [lt["code"] for lt in sc.lamp_types]
    taken = list(session.scalars(select(LampType.code).where(LampType.code.in_(codes))))
    if taken:
        raise Conflict(f"Lamp type codes used by the demo already exist: {', '.join(taken)}.")

    counts: dict[str, int] = {}
    counts["sites"] = _bulk(session, Site.__table__, sc.sites)  # type: ignore[arg-type]
    site_id = dict(
        session.execute(
            select(Site.name, Site.id).where(Site.name.in_([s["name"] for s in sc.sites]))
        ).all()
    )
    areas = [a | {"site_id": site_id[a["site"]]} for a in sc.areas]
    counts["areas"] = _bulk(session, Area.__table__, areas)  # type: ignore[arg-type]
    area_id = {
        (sid, name): aid
        for aid, sid, name in session.execute(
            select(Area.id, Area.site_id, Area.name).where(Area.site_id.in_(site_id.values()))
        )
    }
    counts["lamp_types"] = _bulk(session, LampType.__table__, sc.lamp_types)  # type: ignore[arg-type]
    lamp_rows = session.scalars(select(LampType).where(LampType.code.in_(codes))).all()
    lamp_by_code = {lt.code: lt for lt in lamp_rows}

    fixtures = [
        f
        | {
            "site_id": site_id[f["site"]],
            "area_id": area_id[(site_id[f["site"]], f["area"])],
            "lamp_type_id": lamp_by_code[f["lamp_type_code"]].id,
        }
        for f in sc.fixtures
    ]
    counts["fixtures"] = _bulk(session, Fixture.__table__, fixtures)  # type: ignore[arg-type]
    fixture_id = {
        (sid, tag): fid
        for fid, sid, tag in session.execute(
            select(Fixture.id, Fixture.site_id, Fixture.tag).where(
                Fixture.site_id.in_(site_id.values())
            )
        )
    }
    by_key = {(site_id[f["site"]], f["tag"]): f for f in fixtures}

    counts["lamp_positions"] = _insert_positions(session, sc, site_id, fixture_id, by_key)
    position_id = {
        (fid, no): pid
        for pid, fid, no in session.execute(
            select(LampPosition.id, LampPosition.fixture_id, LampPosition.position_no).where(
                LampPosition.fixture_id.in_(fixture_id.values())
            )
        )
    }

    def where(row: dict[str, Any]) -> tuple[dict[str, Any], int, int]:
        key = (site_id[row["site"]], row["tag"])
        fid = fixture_id[key]
        return by_key[key], fid, position_id[(fid, row["position_no"])]

    site_volts = {s["name"]: s["nominal_voltage_v"] for s in sc.sites}
    life_factor = _life_factors(lamp_by_code)
    removals = []
    now = utcnow()
    for r in sc.removals:
        fx, fid, pid = where(r)
        volts = fx["measured_voltage_v"] or site_volts[r["site"]]  # volts at the lamp
        factor = life_factor(fx["lamp_type_code"], volts)
        removals.append(
            r
            | {
                "site_id": fx["site_id"],
                "fixture_id": fid,
                "position_id": pid,
                "lamp_type_id": fx["lamp_type_id"],
                "operating_voltage_v": volts,
                # Rated-voltage-equivalent hours: life at this voltage is factor x rated.
                "normalised_hours": r["burn_hours"] / factor,
                "created_at": now,
            }
        )
    counts["lamp_removals"] = _bulk(session, LampRemoval.__table__, removals)  # type: ignore[arg-type]
    reports = []
    for b in sc.burnouts:
        fx, fid, pid = where(b)
        reports.append(
            b
            | {
                "site_id": fx["site_id"],
                "area_id": fx["area_id"],
                "fixture_id": fid,
                "position_id": pid,
                "status": "open",
            }
        )
    counts["burnout_reports"] = _bulk(session, BurnoutReport.__table__, reports)  # type: ignore[arg-type]

    counts.update(_insert_readings(session, sc, site_id, area_id, fixture_id))
    session.flush()

    path = key_file_path(key_file)
    secret = _new_demo_key(session, path)
    return DemoSummary(True, "loaded", sc.organisation, counts, secret, path)


def _insert_positions(
    session: Session,
    sc: Scenario,
    site_id: dict[str, int],
    fixture_id: dict[tuple[int, str], int],
    by_key: dict[tuple[int, str], dict[str, Any]],
) -> int:
    """One row per lamp socket: the current lamp went in at the group date or its last spot swap."""
    latest: dict[tuple[int, str, int], Any] = {}
    for r in sc.removals:
        pos = (site_id[r["site"]], r["tag"], r["position_no"])
        latest[pos] = max(latest.get(pos, r["removed_at"]), r["removed_at"])
    dark = {(site_id[b["site"]], b["tag"], b["position_no"]): b["reported_at"] for b in sc.burnouts}
    rows = []
    for (sid, tag), fx in by_key.items():
        for no in range(1, fx["lamps_per_fixture"] + 1):
            group_at = fx["lamps_installed_at"]
            swapped = latest.get((sid, tag, no))
            spot = swapped is not None and swapped > group_at
            rows.append(
                {
                    "fixture_id": fixture_id[(sid, tag)],
                    "position_no": no,
                    "lamp_installed_at": swapped if spot else group_at,
                    # A spot replacement is a new lamp; a group lamp may have come in used.
                    "hours_at_install": 0.0 if spot else fx["lamp_hours_at_install"],
                    "starts_at_install": 0.0 if spot else fx["lamp_starts_at_install"],
                    "burned_out_at": dark.get((sid, tag, no)),
                }
            )
    return _bulk(session, LampPosition.__table__, rows)  # type: ignore[arg-type]


def _life_factors(lamp_by_code: dict[str, LampType]) -> Any:
    """A function (code, volts) -> life multiplier at that voltage, from the lamp's model."""
    models = {code: resolve_lamp_model(lt) for code, lt in lamp_by_code.items()}

    def factor(code: str, volts: float) -> float:
        m = models[code]
        rng = (
            (m.driver_min_volts, m.driver_max_volts)
            if m.driver_min_volts is not None and m.driver_max_volts is not None
            else None
        )
        effect = voltage_effect(
            volts,
            m.rated_volts,
            m.technology,
            m.ballast_behaviour,
            life_exponent=m.life_exponent,
            light_exponent=m.light_exponent,
            power_exponent=m.power_exponent,
            driver_range=rng,
        )
        return float(effect.life_factor)

    return factor


def _insert_readings(
    session: Session,
    sc: Scenario,
    site_id: dict[str, int],
    area_id: dict[tuple[int, str], int],
    fixture_id: dict[tuple[int, str], int],
) -> dict[str, int]:
    """Burn-hour records and voltage readings, when the readings tables exist."""
    counts: dict[str, int] = {}
    tables = Base.metadata.tables
    for table_name, rows, extra in (
        ("burn_hour_records", sc.burn_hours, {"kind": "period"}),
        ("voltage_readings", sc.voltages, {}),
    ):
        if table_name not in tables or not _has_table(session, table_name) or not rows:
            continue
        out = []
        for r in rows:
            sid = site_id[r["site"]]
            target = (
                {"fixture_id": fixture_id[(sid, r["tag"])], "area_id": None}
                if r["tag"]
                else {"area_id": area_id[(sid, r["area"])], "fixture_id": None}
            )
            out.append(r | extra | target | {"site_id": sid})
        counts[table_name] = _bulk(session, tables[table_name], out)
    return counts


def _read_key_file(path: Path) -> str | None:
    try:
        text = path.read_text(encoding="utf-8").strip()
    except OSError:
        return None
    return text or None


def _write_key_file(path: Path, secret: str) -> None:
    path.parent.mkdir(parents=True, exist_ok=True)
    path.write_text(secret + "\n", encoding="utf-8")
    path.chmod(0o600)  # an admin secret: readable by its owner only


def _new_demo_key(session: Session, path: Path) -> str:
    """Create an admin key named demo (or demo-2, demo-3, ...) and write its secret to path."""
    names = set(session.scalars(select(ApiKey.name).where(ApiKey.name.like("demo%"))))
    name, n = DEMO_KEY_NAME, 1
    while name in names:
        n += 1
        name = f"{DEMO_KEY_NAME}-{n}"
    _, secret = keys.create_key(session, name, "admin")
    _write_key_file(path, secret)
    return secret


def demo_key(session: Session, key_file: Path | None = None) -> str | None:
    """The demo admin key: the saved one if still active, else a fresh one; None without demo."""
    if not demo_loaded(session):
        return None
    path = key_file_path(key_file)
    saved = _read_key_file(path)
    if saved is not None:
        row = session.scalar(select(ApiKey).where(ApiKey.digest == keys.digest(saved)))
        if row is not None and row.revoked_at is None:
            return saved
    return _new_demo_key(session, path)
