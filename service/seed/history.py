"""The demo's lamp positions, past removals, open burnouts and readings.

Removals are inserted in bulk with their rated-condition hours computed the way the events
service computes them (burn hours / the life factor of voltage x switching, from the
numeric core); open burnouts go through the events service itself, so each one carries
its failure record exactly as a report over the API would.
"""

from __future__ import annotations

import math
from typing import Any

import numpy as np
from sqlalchemy import Table, insert, inspect
from sqlalchemy.orm import Session

import service.models_registry  # noqa: F401  (registers every domain's tables on Base.metadata)
from service.catalogue.lamp_model import lamp_type_table, resolve_lamp_model
from service.catalogue.models import LampType
from service.db.base import Base, utcnow
from service.events import burnouts
from service.events.models import LampRemoval
from service.register.models import LampPosition
from service.reliability.fleet import evaluate_fleet
from service.seed.files import Scenario

Ids = dict[tuple[int, str], int]


def bulk(session: Session, table: Table, rows: list[dict[str, Any]]) -> int:
    """Insert rows with one executemany, keeping only the table's own columns."""
    if not rows:
        return 0
    names = set(table.c.keys())
    session.execute(insert(table), [{k: v for k, v in r.items() if k in names} for r in rows])
    return len(rows)


def hours_per_start(area: dict[str, Any]) -> float:
    """Mean burn hours per start of an area's schedule (NaN when unknown), as Area does."""
    weekly = area["weekly_burn_hours"]
    if weekly is None and area["hours_per_day"] is not None:
        weekly = area["hours_per_day"] * area["days_per_week"]
    days = area["days_per_week"] if area["days_per_week"] is not None else 7.0
    starts = area["starts_per_day"] * days
    if not weekly or starts <= 0:
        return math.nan
    return float(weekly / starts)


def insert_positions(
    session: Session,
    sc: Scenario,
    site_id: dict[str, int],
    fixture_id: Ids,
    by_key: dict[tuple[int, str], dict[str, Any]],
) -> int:
    """One row per socket: the lamp went in at the group date, or at its last spot swap."""
    latest: dict[tuple[int, str, int], Any] = {}
    for r in sc.removals:
        pos = (site_id[r["site"]], r["tag"], r["position_no"])
        latest[pos] = max(latest.get(pos, r["removed_at"]), r["removed_at"])
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
                }
            )
    return bulk(session, LampPosition.__table__, rows)  # type: ignore[arg-type]


def life_factors(
    lamp_types: list[LampType], type_ids: list[int], volts: list[float], hps: list[float]
) -> np.ndarray:
    """Life multiplier (voltage x switching) of each lamp from the catalogue models."""
    order = {lt.id: i for i, lt in enumerate(lamp_types)}
    table = lamp_type_table([resolve_lamp_model(lt) for lt in lamp_types])
    n = len(type_ids)
    res = evaluate_fleet(
        table,
        np.asarray([order[t] for t in type_ids], dtype=np.int64),
        np.zeros(n),
        np.asarray(volts, dtype=np.float64),
        np.asarray(hps, dtype=np.float64),
        0.0,
    )
    return np.asarray(res.life_factor, dtype=np.float64)


def insert_removals(
    session: Session,
    sc: Scenario,
    lamp_types: list[LampType],
    where: Any,
    area_cycle: dict[tuple[str, str], float],
) -> int:
    """Past removals (burnouts and group relamps) with rated-condition hours."""
    site_volts = {s["name"]: s["nominal_voltage_v"] for s in sc.sites}
    rows = []
    for r in sc.removals:
        fx, fid, pid = where(r)
        volts = fx["measured_voltage_v"] or site_volts[r["site"]]  # volts at the lamp
        rows.append(
            r
            | {
                "site_id": fx["site_id"],
                "fixture_id": fid,
                "position_id": pid,
                "lamp_type_id": fx["lamp_type_id"],
                "operating_voltage_v": volts,
                "cycle": area_cycle[(r["site"], fx["area"])],
                "created_at": utcnow(),
            }
        )
    if not rows:
        return 0
    factor = life_factors(
        lamp_types,
        [r["lamp_type_id"] for r in rows],
        [r["operating_voltage_v"] for r in rows],
        [r["cycle"] for r in rows],
    )
    for r, f in zip(rows, factor, strict=True):
        # Rated-condition hours: life here is f x rated life, so hours x (1 / f).
        r["normalised_hours"] = r["burn_hours"] / float(f)
    return bulk(session, LampRemoval.__table__, rows)  # type: ignore[arg-type]


def report_burnouts(session: Session, sc: Scenario, where: Any) -> int:
    """Open burnout reports through the events service (each records its failure)."""
    for b in sorted(sc.burnouts, key=lambda b: b["reported_at"]):
        _, _, pid = where(b)
        burnouts.report_burnout(
            session,
            position_id=pid,
            reported_at=b["reported_at"],
            burn_hours=b["burn_hours"],
            note=b["note"],
        )
    return len(sc.burnouts)


def insert_readings(
    session: Session, sc: Scenario, site_id: dict[str, int], area_id: Ids, fixture_id: Ids
) -> dict[str, int]:
    """Burn-hour records and voltage readings, when the readings tables exist."""
    counts: dict[str, int] = {}
    tables = Base.metadata.tables
    for table_name, rows, extra in (
        ("burn_hour_records", sc.burn_hours, {"kind": "period"}),
        ("voltage_readings", sc.voltages, {}),
    ):
        if table_name not in tables or not rows:
            continue
        if not inspect(session.connection()).has_table(table_name):
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
        counts[table_name] = bulk(session, tables[table_name], out)
    return counts
