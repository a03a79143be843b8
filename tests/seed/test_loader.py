"""The demo loader: counts from the files, references that resolve, --if-empty, the key."""

from __future__ import annotations

import csv
import json
import math
from datetime import UTC, date, datetime, timedelta
from pathlib import Path
from typing import Any

import pytest
from fastapi.testclient import TestClient
from sqlalchemy import func, select
from sqlalchemy.orm import Session

from service.api.errors import Conflict
from service.catalogue.models import LampType
from service.events.models import BurnoutReport, LampRemoval
from service.keys import service as keys_service
from service.keys.models import ApiKey
from service.register.models import Area, Fixture, LampPosition, Site
from service.seed import files
from service.seed.loader import demo_key, load_demo

SEED = files.seed_dir()


def _csv(name: str) -> list[dict[str, str]]:
    with (SEED / name).open(newline="", encoding="utf-8") as f:
        return list(csv.DictReader(f))


def _count(db: Session, model: Any) -> int:
    return int(db.scalar(select(func.count()).select_from(model)) or 0)


def _as_of() -> date:
    return date.fromisoformat(json.loads((SEED / files.SCENARIO).read_text())["as_of"])


def test_counts_match_the_data_files(db: Session, tmp_path: Path) -> None:
    summary = load_demo(db, key_file=tmp_path / "key.txt")
    db.commit()
    scenario = json.loads((SEED / files.SCENARIO).read_text())
    fixtures = _csv(files.FIXTURES)
    assert summary.loaded
    expected = {
        "sites": len(scenario["sites"]),
        "areas": sum(len(s["areas"]) for s in scenario["sites"]),
        "lamp_types": len(json.loads((SEED / files.LAMP_TYPES).read_text())),
        "fixtures": len(fixtures),
        "lamp_positions": sum(int(f["lamps_per_fixture"]) for f in fixtures),
        # Past removals, plus the failure record each open burnout report writes.
        "lamp_removals": len(_csv(files.REMOVALS)) + len(_csv(files.BURNOUTS)),
        "burnout_reports": len(_csv(files.BURNOUTS)),
    }
    for table, n in expected.items():
        assert summary.counts[table] == n, table
    models = {
        "sites": Site,
        "areas": Area,
        "lamp_types": LampType,
        "fixtures": Fixture,
        "lamp_positions": LampPosition,
        "lamp_removals": LampRemoval,
        "burnout_reports": BurnoutReport,
    }
    for table, model in models.items():
        assert _count(db, model) == expected[table], table
    # The scenario the README promises: three sites of different character, a few hundred
    # fixtures with 1 to 4 lamps each.
    assert expected["sites"] == 3 and 300 <= expected["fixtures"] <= 400
    assert {int(f["lamps_per_fixture"]) for f in fixtures} <= {1, 2, 3, 4}


def test_references_resolve(db: Session, tmp_path: Path) -> None:
    load_demo(db, key_file=tmp_path / "key.txt")
    db.commit()
    # Every fixture's site is its area's site, and its lamp type exists.
    bad = db.scalar(
        select(func.count())
        .select_from(Fixture)
        .join(Area, Area.id == Fixture.area_id)
        .where(Area.site_id != Fixture.site_id)
    )
    assert bad == 0
    assert _count(db, Fixture) == db.scalar(
        select(func.count()).select_from(Fixture).join(LampType)
    )
    # Positions run 1..lamps_per_fixture for every fixture.
    rows = db.execute(
        select(
            Fixture.lamps_per_fixture,
            func.count(LampPosition.id),
            func.max(LampPosition.position_no),
        )
        .join(LampPosition, LampPosition.fixture_id == Fixture.id)
        .group_by(Fixture.id, Fixture.lamps_per_fixture)
    ).all()
    assert len(rows) == _count(db, Fixture)
    assert all(n == lamps == top for lamps, n, top in rows)
    # Removals point at a position of their own fixture, with the fixture's lamp type.
    mismatched = db.scalar(
        select(func.count())
        .select_from(LampRemoval)
        .join(LampPosition, LampPosition.id == LampRemoval.position_id)
        .join(Fixture, Fixture.id == LampPosition.fixture_id)
        .where(
            (Fixture.id != LampRemoval.fixture_id)
            | (Fixture.lamp_type_id != LampRemoval.lamp_type_id)
            | (Fixture.site_id != LampRemoval.site_id)
        )
    )
    assert mismatched == 0
    # An open burnout report leaves its position dark; nothing else is dark.
    reports = db.scalars(select(BurnoutReport)).all()
    dark = db.scalars(select(LampPosition).where(LampPosition.burned_out_at.is_not(None))).all()
    assert {r.position_id for r in reports} == {p.id for p in dark}
    assert all(r.status == "open" for r in reports)
    # Each report carries one failure record of the dark lamp, at the report's time.
    for r in reports:
        failure = db.get(LampRemoval, r.removal_id)
        assert failure is not None and failure.failed and failure.position_id == r.position_id
        assert failure.removed_at == r.reported_at and failure.burn_hours == r.burn_hours
    # A lamp is never removed before it went in, and none went in after now.
    removals = db.scalars(select(LampRemoval)).all()
    assert all(r.installed_at < r.removed_at for r in removals)
    latest = db.scalar(select(func.max(LampPosition.lamp_installed_at)))
    assert latest is not None and latest <= datetime.now(UTC) + timedelta(days=1)


def test_sites_have_the_promised_character(db: Session, tmp_path: Path) -> None:
    load_demo(db, key_file=tmp_path / "key.txt")
    db.commit()
    sites = db.scalars(select(Site)).all()
    assert len({s.time_zone for s in sites}) == 3 and len({s.currency for s in sites}) == 3
    techs = {
        site.name: set(
            db.scalars(select(LampType.technology).join(Fixture).where(Fixture.site_id == site.id))
        )
        for site in sites
    }
    parking = next(n for n, t in techs.items() if "metal_halide" in t)
    assert techs[parking] == {"metal_halide", "high_pressure_sodium"}
    parking_areas = db.scalars(select(Area).join(Site).where(Site.name == parking)).all()
    assert all(a.weekly_burn_hours == 168 and a.access_method == "lift" for a in parking_areas)
    hall = next(n for n, t in techs.items() if "incandescent" in t)
    assert techs[hall] == {"incandescent", "halogen"}
    # The hall's circuits run above the lamps' rated volts.
    over = db.execute(
        select(Fixture.measured_voltage_v, LampType.rated_volts)
        .join(LampType)
        .join(Site, Site.id == Fixture.site_id)
        .where(Site.name == hall)
    ).all()
    assert over and all(v is not None and v > rated for v, rated in over)
    office = next(n for n in techs if n not in (parking, hall))
    assert techs[office] == {"linear_fluorescent", "led"}


def test_removal_hours_are_normalised_to_rated_voltage(db: Session, tmp_path: Path) -> None:
    load_demo(db, key_file=tmp_path / "key.txt")
    db.commit()
    row = db.execute(
        select(LampRemoval, LampType)
        .join(LampType, LampType.id == LampRemoval.lamp_type_id)
        .where(LampType.technology == "incandescent", LampType.life_exponent.is_(None))
        .limit(1)
    ).one()
    removal, lamp = row
    # Inverse power law [published: Nelson, Accelerated Testing; exponent 13 is the
    # incandescent default, common practice]: life at V = rated x (V_rated/V)^13,
    # so rated-voltage-equivalent hours = hours x (V/V_rated)^13.
    expected = removal.burn_hours * (removal.operating_voltage_v / lamp.rated_volts) ** 13
    assert removal.operating_voltage_v > lamp.rated_volts
    assert math.isclose(removal.normalised_hours, expected, rel_tol=1e-9)


def test_timestamps_shift_with_the_load_day(db: Session, tmp_path: Path) -> None:
    day = _as_of() - timedelta(days=10)
    load_demo(db, key_file=tmp_path / "key.txt", today=day)
    db.commit()
    swapped = {(r["site"], r["tag"]) for r in _csv(files.REMOVALS)}
    first = next(f for f in _csv(files.FIXTURES) if (f["site"], f["tag"]) not in swapped)
    fx = db.scalar(select(Fixture).where(Fixture.tag == first["tag"]))
    assert fx is not None and fx.installed_on == date.fromisoformat(
        first["installed_on"]
    ) - timedelta(days=10)
    stamped = datetime.fromisoformat(first["lamps_installed_at"].replace("Z", "+00:00"))
    assert [p.lamp_installed_at for p in fx.positions] == [stamped - timedelta(days=10)] * len(
        fx.positions
    )


def test_if_empty_is_idempotent_and_a_second_load_is_refused(db: Session, tmp_path: Path) -> None:
    key_file = tmp_path / "key.txt"
    first = load_demo(db, if_empty=True, key_file=key_file)
    db.commit()
    before = {m.__name__: _count(db, m) for m in (Site, Fixture, LampPosition, LampRemoval, ApiKey)}
    again = load_demo(db, if_empty=True, key_file=key_file)
    db.commit()
    assert first.loaded and not again.loaded and "already has sites" in again.reason
    assert {
        m.__name__: _count(db, m) for m in (Site, Fixture, LampPosition, LampRemoval, ApiKey)
    } == before
    with pytest.raises(Conflict):
        load_demo(db, key_file=key_file)


def test_if_empty_loads_nothing_beside_other_sites(db: Session, tmp_path: Path) -> None:
    db.add(
        Site(
            name="Someone else's yard",
            time_zone="UTC",
            nominal_voltage_v=230,
            currency="EUR",
            energy_price_per_kwh=0.2,
            labour_rate_per_h=30,
        )
    )
    db.commit()
    summary = load_demo(db, if_empty=True, key_file=tmp_path / "key.txt")
    assert not summary.loaded and _count(db, Fixture) == 0
    assert not (tmp_path / "key.txt").exists()
    assert demo_key(db, tmp_path / "key.txt") is None  # no demo, no admin key made up


def test_demo_key_lists_the_demo_fixtures(db: Session, client: TestClient, tmp_path: Path) -> None:
    key_file = tmp_path / "var" / "demo-key.txt"
    summary = load_demo(db, key_file=key_file)
    db.commit()
    assert key_file.read_text().strip() == summary.key
    key = demo_key(db, key_file)
    db.commit()
    assert key == summary.key
    headers = {"Authorization": f"Bearer {key}"}
    r = client.get("/api/v1/fixtures?limit=5", headers=headers)
    assert r.status_code == 200, r.text
    assert r.json()["total"] == len(_csv(files.FIXTURES))
    tags = {row["tag"] for row in _csv(files.FIXTURES)}
    assert {item["tag"] for item in r.json()["items"]} <= tags
    assert client.get("/api/v1/keys", headers=headers).status_code == 200  # admin scope


def test_demo_key_is_replaced_when_revoked_or_lost(db: Session, tmp_path: Path) -> None:
    key_file = tmp_path / "demo-key.txt"
    summary = load_demo(db, key_file=key_file)
    db.commit()
    row = db.scalar(select(ApiKey).where(ApiKey.name == "demo"))
    assert row is not None and row.scope == "admin"
    keys_service.revoke_key(db, row.id)
    db.commit()
    fresh = demo_key(db, key_file)
    db.commit()
    assert fresh is not None and fresh != summary.key
    assert key_file.read_text().strip() == fresh
    active = keys_service.find_active(db, fresh)
    assert active is not None and active.name == "demo-2" and active.scope == "admin"
    key_file.unlink()
    third = demo_key(db, key_file)
    assert third not in (None, fresh, summary.key)
    assert key_file.read_text().strip() == third
