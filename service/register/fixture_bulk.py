"""Bulk import and export of fixtures by site, area and lamp type names: all rows or none.

Fast path for large files (100,000 rows in seconds): cells are checked with small plain
functions (no model object per row), names are resolved with one query per table, and
fixtures and lamp positions go in through service.api.bulk_insert (COPY on PostgreSQL,
the driver's executemany on SQLite). Fixture ids are read back with one query by (site_id, tag).
"""

from __future__ import annotations

from collections.abc import Callable, Sequence
from dataclasses import dataclass
from datetime import UTC, datetime, time
from typing import Any

from sqlalchemy import Table, bindparam, delete, select, update
from sqlalchemy.orm import Session

from service.api.bulk import Row, RowErrors
from service.api.bulk_insert import bulk_insert, chunks
from service.api.cells import (
    CellError,
    date_cell,
    datetime_cell,
    int_cell,
    number_cell,
    text_cell,
)
from service.catalogue.bulk import check_on_duplicate
from service.catalogue.models import LampType
from service.db.base import utcnow
from service.register.fixtures import FUTURE_SLACK, ballast_problem, position_rows
from service.register.models import Area, Fixture, LampPosition, Site
from service.reliability.technologies import BALLASTS, TECHNOLOGY_DEFAULTS

FIXTURE_COLUMNS: tuple[str, ...] = (
    "site",
    "area",
    "tag",
    "location",
    "lamp_type",
    "lamps_per_fixture",
    "ballast_kind",
    "measured_voltage_v",
    "installed_on",
    "lamps_installed_at",
    "lamp_hours_at_install",
    "lamp_starts_at_install",
)

_FIXTURES: Table = Fixture.__table__  # type: ignore[assignment]
_POSITIONS: Table = LampPosition.__table__  # type: ignore[assignment]


@dataclass(frozen=True)
class FixtureImportResult:
    """What a fixture import did."""

    rows: int
    created: int
    updated: int
    positions_created: int


@dataclass
class _Good:
    """A row that passed the cell checks, with names still to resolve."""

    number: int
    site: str
    area: str
    lamp_type: str
    values: dict[str, Any]  # fixture columns except ids
    installed_at: datetime | None
    hours: float
    starts: float


def _volts(v: Any) -> float:
    x = number_cell(v)
    if not 1 <= x <= 1000:  # the same range as FixtureCreate.measured_voltage_v
        raise CellError("must lie in [1, 1000] volts")
    return x


def _hours(v: Any) -> float:
    x = number_cell(v)
    if not 0 <= x <= 1_000_000:
        raise CellError("must lie in [0, 1,000,000] hours")
    return x


def _count(v: Any) -> float:
    x = number_cell(v)
    if not 0 <= x <= 100_000_000:  # the same range as FixtureCreate.lamp_starts_at_install
        raise CellError("must lie in [0, 100,000,000]")
    return x


def _lamps(v: Any) -> int:
    return int_cell(v, 1, 64)


def _ballast(v: Any) -> str:
    s = str(v).strip()
    if s not in BALLASTS:
        raise CellError(f"must be one of: {', '.join(BALLASTS)}")
    return s


def _text_reader(max_len: int) -> Callable[[Any], str | None]:
    return lambda v: text_cell(v, max_len)


# column: (reader, value when empty, required). Readers raise CellError.
_SPECS: tuple[tuple[str, Callable[[Any], Any], Any, bool], ...] = (
    ("site", _text_reader(200), None, True),
    ("area", _text_reader(200), None, True),
    ("tag", _text_reader(64), None, True),
    ("location", _text_reader(300), None, False),
    ("lamp_type", _text_reader(40), None, True),
    ("lamps_per_fixture", _lamps, 1, False),
    ("ballast_kind", _ballast, None, False),
    ("measured_voltage_v", _volts, None, False),
    ("installed_on", date_cell, None, False),
    ("lamps_installed_at", datetime_cell, None, False),
    ("lamp_hours_at_install", _hours, 0.0, False),
    ("lamp_starts_at_install", _count, 0.0, False),
)
# Columns a CSV header must have (the others may be left out).
FIXTURE_REQUIRED: tuple[str, ...] = ("site", "area", "tag", "lamp_type")
_CACHED = ("installed_on", "lamps_installed_at")  # many rows repeat the same dates


def _read_row(
    row: Row, errors: RowErrors, now: datetime, cache: dict[tuple[str, Any], Any]
) -> _Good | None:
    d = row.data
    n = row.number
    ok = True
    got: dict[str, Any] = {}
    for name, read, default, required in _SPECS:
        v = d.get(name)
        if v is None or (isinstance(v, str) and not v.strip()):
            if required:
                errors.add(n, name, f"{name} is required")
                ok = False
            got[name] = default
            continue
        try:
            if name in _CACHED and isinstance(v, str):
                key = (name, v)
                if key not in cache:
                    cache[key] = read(v)
                got[name] = cache[key]
            else:
                got[name] = read(v)
        except CellError as exc:
            errors.add(n, name, f"{name} {exc}")
            got[name] = default
            ok = False
    installed_at = got["lamps_installed_at"]
    installed_on = got["installed_on"]
    if installed_at is not None and installed_at > now + FUTURE_SLACK:
        errors.add(n, "lamps_installed_at", "lamps_installed_at is after now")
        ok = False
    elif (
        installed_at is None
        and installed_on is not None
        and datetime.combine(installed_on, time(0), tzinfo=UTC) > now + FUTURE_SLACK
    ):
        errors.add(n, "installed_on", "installed_on is after today (give lamps_installed_at)")
        ok = False
    if not ok:
        return None
    return _Good(
        number=n,
        site=got["site"],
        area=got["area"],
        lamp_type=got["lamp_type"],
        values={
            "tag": got["tag"],
            "location": got["location"],
            "lamps_per_fixture": got["lamps_per_fixture"],
            "ballast_kind": got["ballast_kind"],
            "measured_voltage_v": got["measured_voltage_v"],
            "installed_on": installed_on,
        },
        installed_at=installed_at,
        hours=got["lamp_hours_at_install"],
        starts=got["lamp_starts_at_install"],
    )


def import_fixtures(
    session: Session, rows: Sequence[Row], on_duplicate: str = "error"
) -> FixtureImportResult:
    """Validate every row, then insert (and with on_duplicate='update' change) fixtures."""
    check_on_duplicate(on_duplicate)
    errors = RowErrors()
    now = utcnow()
    cache: dict[tuple[str, Any], Any] = {}
    good = [g for g in (_read_row(r, errors, now, cache) for r in rows) if g is not None]

    # One query per table to resolve names.
    sites = {name: i for i, name in session.execute(select(Site.id, Site.name))}
    areas = {
        (s, name): i for i, s, name in session.execute(select(Area.id, Area.site_id, Area.name))
    }
    retired_areas = set(session.scalars(select(Area.id).where(Area.retired_at.is_not(None))))
    types = {
        code: (i, tech, ballast or TECHNOLOGY_DEFAULTS[tech].default_ballast)
        for i, code, tech, ballast in session.execute(
            select(LampType.id, LampType.code, LampType.technology, LampType.ballast_behaviour)
        )
    }
    site_ids = {sites[g.site] for g in good if g.site in sites}
    existing: dict[tuple[int, str], tuple[int, int]] = {}
    if site_ids:
        stmt = select(Fixture.id, Fixture.site_id, Fixture.tag, Fixture.lamps_per_fixture).where(
            Fixture.site_id.in_(site_ids)
        )
        existing = {(s, t): (i, k) for i, s, t, k in session.execute(stmt)}

    seen: dict[tuple[int, str], int] = {}
    new_fixtures: list[dict[str, Any]] = []
    new_meta: list[tuple[int, str, int, datetime, float, float]] = []
    changed: list[dict[str, Any]] = []
    grow: list[dict[str, Any]] = []  # positions to add to updated fixtures
    shrink: list[dict[str, Any]] = []  # positions to drop from updated fixtures
    for g in good:
        site_id = sites.get(g.site)
        if site_id is None:
            errors.add(g.number, "site", f"no site named '{g.site}'")
            continue
        area_id = areas.get((site_id, g.area))
        if area_id is None:
            errors.add(g.number, "area", f"site '{g.site}' has no area named '{g.area}'")
        elif area_id in retired_areas:
            errors.add(g.number, "area", f"area '{g.area}' is retired", conflict=True)
        lt = types.get(g.lamp_type)
        if lt is None:
            errors.add(g.number, "lamp_type", f"no lamp type with code '{g.lamp_type}'")
        if area_id is None or lt is None:
            continue
        v = g.values
        ballast = v["ballast_kind"] or lt[2]
        problem = ballast_problem(lt[1], ballast)
        if problem:
            errors.add(g.number, "ballast_kind", problem)
            continue
        key = (site_id, v["tag"])
        if key in seen:
            errors.add(g.number, "tag", f"tag also on row {seen[key]} of this file")
            continue
        seen[key] = g.number
        at = g.installed_at
        if at is None:
            on = v["installed_on"]
            at = datetime.combine(on, time(0), tzinfo=UTC) if on is not None else now
        values = {
            **v,
            "ballast_kind": ballast,
            "site_id": site_id,
            "area_id": area_id,
            "lamp_type_id": lt[0],
        }
        if key in existing:
            if on_duplicate == "error":
                errors.add(g.number, "tag", f"site '{g.site}' already has this tag", conflict=True)
                continue
            fid, old_count = existing[key]
            changed.append({**values, "b_id": fid, "updated_at": now})
            k = v["lamps_per_fixture"]
            if k > old_count:
                grow.extend(position_rows(fid, old_count + 1, k, at, g.hours, g.starts))
            elif k < old_count:
                shrink.append({"b_fid": fid, "b_keep": k})
        else:
            new_fixtures.append({**values, "created_at": now, "updated_at": now})
            new_meta.append((site_id, v["tag"], v["lamps_per_fixture"], at, g.hours, g.starts))
    errors.raise_if_any("fixture import")

    session.flush()
    conn = session.connection()
    bulk_insert(conn, _FIXTURES, new_fixtures)
    positions: list[dict[str, Any]] = list(grow)
    if new_meta:
        ids = {
            (s, t): i
            for i, s, t in conn.execute(
                select(_FIXTURES.c.id, _FIXTURES.c.site_id, _FIXTURES.c.tag).where(
                    _FIXTURES.c.site_id.in_({m[0] for m in new_meta})
                )
            )
        }
        for site_id, tag, k, at, hrs, starts in new_meta:
            positions.extend(position_rows(ids[(site_id, tag)], 1, k, at, hrs, starts))
    if changed:
        stmt_u = update(_FIXTURES).where(_FIXTURES.c.id == bindparam("b_id"))
        for chunk in chunks(changed):
            conn.execute(stmt_u, chunk)
    if shrink:
        stmt_d = delete(_POSITIONS).where(
            _POSITIONS.c.fixture_id == bindparam("b_fid"),
            _POSITIONS.c.position_no > bindparam("b_keep"),
        )
        conn.execute(stmt_d, shrink)
    bulk_insert(conn, _POSITIONS, positions)
    session.expire_all()  # rows changed behind the ORM's back
    return FixtureImportResult(
        rows=len(rows),
        created=len(new_fixtures),
        updated=len(changed),
        positions_created=len(positions),
    )
