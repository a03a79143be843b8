"""Loading the invented demo scenario, and the demo API key the `make run` banner prints.

Everything goes in inside the caller's transaction (flush, never commit): all of the
scenario or none of it. The register and catalogue go in with Core bulk inserts after the
domains' own schemas checked every value; open burnouts go through the events service.
Tables the database does not have yet (readings) are skipped.
"""

from __future__ import annotations

import os
from dataclasses import dataclass, field
from datetime import date
from pathlib import Path
from typing import Any

from sqlalchemy import func, select
from sqlalchemy.orm import Session

from service.api.errors import Conflict
from service.catalogue.models import LampType
from service.keys import service as keys
from service.keys.models import ApiKey
from service.register.models import Area, Fixture, LampPosition, Site
from service.seed import history
from service.seed.files import Scenario, read_scenario, seed_dir
from service.seed.retrofit import load_retrofit_options
from service.seed.stock import load_stock

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


def _demo_site_names(session: Session, names: list[str]) -> list[str]:
    return list(session.scalars(select(Site.name).where(Site.name.in_(names))))


def demo_loaded(session: Session, scenario: Scenario | None = None) -> bool:
    """True when the demo's sites are in the database."""
    sc = scenario or read_scenario()
    return bool(_demo_site_names(session, [s["name"] for s in sc.sites]))


def _refuse_clashes(session: Session, sc: Scenario) -> None:
    clash = _demo_site_names(session, [s["name"] for s in sc.sites])
    if clash:
        raise Conflict(f"The demo is already loaded (site '{clash[0]}' exists).", field="name")
    codes = [lt["code"] for lt in sc.lamp_types]
    taken = list(session.scalars(select(LampType.code).where(LampType.code.in_(codes))))
    if taken:
        raise Conflict(f"Lamp type codes used by the demo already exist: {', '.join(taken)}.")


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
    _refuse_clashes(session, sc)

    counts: dict[str, int] = {}
    counts["sites"] = history.bulk(session, Site.__table__, sc.sites)  # type: ignore[arg-type]
    names = [s["name"] for s in sc.sites]
    site_id: dict[str, int] = {
        n: i for n, i in session.execute(select(Site.name, Site.id).where(Site.name.in_(names)))
    }
    areas = [a | {"site_id": site_id[a["site"]]} for a in sc.areas]
    counts["areas"] = history.bulk(session, Area.__table__, areas)  # type: ignore[arg-type]
    area_id: history.Ids = {
        (sid, name): aid
        for aid, sid, name in session.execute(
            select(Area.id, Area.site_id, Area.name).where(Area.site_id.in_(site_id.values()))
        )
    }
    counts["lamp_types"] = history.bulk(session, LampType.__table__, sc.lamp_types)  # type: ignore[arg-type]
    codes = [lt["code"] for lt in sc.lamp_types]
    lamp_types = list(session.scalars(select(LampType).where(LampType.code.in_(codes))))
    lamp_id = {lt.code: lt.id for lt in lamp_types}

    fixtures = [
        f
        | {
            "site_id": site_id[f["site"]],
            "area_id": area_id[(site_id[f["site"]], f["area"])],
            "lamp_type_id": lamp_id[f["lamp_type_code"]],
        }
        for f in sc.fixtures
    ]
    counts["fixtures"] = history.bulk(session, Fixture.__table__, fixtures)  # type: ignore[arg-type]
    fixture_id: history.Ids = {
        (sid, tag): fid
        for fid, sid, tag in session.execute(
            select(Fixture.id, Fixture.site_id, Fixture.tag).where(
                Fixture.site_id.in_(site_id.values())
            )
        )
    }
    by_key = {(site_id[f["site"]], f["tag"]): f for f in fixtures}
    counts["lamp_positions"] = history.insert_positions(session, sc, site_id, fixture_id, by_key)
    position_id: dict[tuple[int, int], int] = {
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

    cycle = {(a["site"], a["name"]): history.hours_per_start(a) for a in sc.areas}
    removals = history.insert_removals(session, sc, lamp_types, where, cycle)
    counts.update(history.insert_readings(session, sc, site_id, area_id, fixture_id))
    counts["burnout_reports"] = history.report_burnouts(session, sc, where)
    counts["lamp_removals"] = removals + counts["burnout_reports"]  # a report records a failure
    counts.update(_stock_and_retrofits(session, seed_directory or seed_dir(), site_id, lamp_id))
    session.flush()

    path = key_file_path(key_file)
    secret = _new_demo_key(session, path)
    return DemoSummary(True, "loaded", sc.organisation, counts, secret, path)


def _stock_and_retrofits(
    session: Session, root: Path, site_id: dict[str, int], lamp_id: dict[str, int]
) -> dict[str, int]:
    """The demo's storerooms with their stock, and its retrofit options: rows made."""
    return {
        "stock_lines": load_stock(session, root, site_id, lamp_id),
        "retrofit_options": load_retrofit_options(session, root, lamp_id),
    }


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
