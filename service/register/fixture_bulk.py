"""Bulk import of fixtures by site, area and lamp type names: all rows or none.

import_fixtures runs load -> compute -> write: read_fixture_cells (the upload's columns,
typed by service.uploads.cells; pure) and load_names (one query per table), plan_import
(pure: names to ids, duplicates, what to insert, update, grow or shrink), write_import
(fixtures through the bulk writer, which returns their ids, then their lamp positions).
A timestamp without an offset is UTC here, as in POST /fixtures.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from datetime import UTC, date, datetime, time
from typing import Any

import numpy as np
from numpy.typing import NDArray
from sqlalchemy import Table, bindparam, delete, select, update
from sqlalchemy.orm import Session

from service.catalogue.bulk import check_on_duplicate
from service.catalogue.models import LampType
from service.config import get_settings
from service.db.base import utcnow
from service.register.fixtures import FUTURE_SLACK, ballast_problem, position_rows
from service.register.models import Area, Fixture, LampPosition, Site
from service.reliability.technologies import BALLASTS, TECHNOLOGY_DEFAULTS
from service.uploads import cells
from service.uploads.errors import RowErrors
from service.uploads.parse import Columns, UploadSpec
from service.uploads.write import Epoch, write_rows

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
# Columns a CSV header must have (the others may be left out).
FIXTURE_REQUIRED: tuple[str, ...] = ("site", "area", "tag", "lamp_type")
FIXTURE_UPLOAD = UploadSpec(columns=FIXTURE_COLUMNS, required=FIXTURE_REQUIRED)

_FIXTURES: Table = Fixture.__table__  # type: ignore[assignment]
_POSITIONS: Table = LampPosition.__table__  # type: ignore[assignment]


@dataclass(frozen=True)
class FixtureImportResult:
    """What a fixture import did."""

    rows: int
    created: int
    updated: int
    positions_created: int


@dataclass(frozen=True, kw_only=True)
class FixtureCells:
    """The upload's columns, typed; ok: rows whose cells all passed."""

    numbers: NDArray[np.int64]
    ok: NDArray[np.bool_]
    site: list[str | None]
    area: list[str | None]
    tag: list[str | None]
    location: list[str | None]
    lamp_type: list[str | None]
    lamps: NDArray[np.int64]
    ballast: list[str | None]
    volts: NDArray[np.float64]
    installed_on: list[date | None]
    installed_at: list[datetime]  # given, else installed_on at 00:00 UTC, else now
    hours: NDArray[np.float64]
    starts: NDArray[np.float64]


@dataclass(frozen=True, kw_only=True)
class Names:
    """What the names of an upload resolve to, and the fixtures its sites have."""

    sites: dict[str, int]
    areas: dict[tuple[int, str], int]
    types: dict[str, tuple[int, str, str]]  # code -> (id, technology, ballast behaviour)
    existing: dict[tuple[int, str], tuple[int, int]]  # (site, tag) -> (id, lamps)
    retired_areas: frozenset[int] = frozenset()  # no new or moved fixtures go there


@dataclass(kw_only=True)
class ImportPlan:
    """What an import writes; rows: index into FixtureCells of each new fixture."""

    rows: int
    new: list[int] = field(default_factory=list)
    new_values: list[dict[str, Any]] = field(default_factory=list)
    changed: list[dict[str, Any]] = field(default_factory=list)
    grow: list[dict[str, Any]] = field(default_factory=list)  # positions of updated fixtures
    shrink: list[dict[str, Any]] = field(default_factory=list)


def read_fixture_cells(c: Columns, errors: RowErrors, now: datetime) -> FixtureCells:
    """Compute: every column read and range-checked at once (pure)."""
    text = cells.texts
    installed_on = cells.dates(c, "installed_on", errors)
    given_at = cells.datetimes(c, "lamps_installed_at", errors)  # no zone: UTC
    later = now + FUTURE_SLACK
    at: list[datetime] = []
    for i, (on, g) in enumerate(zip(installed_on, given_at, strict=True)):
        if g is not None and g > later:
            errors.add(int(c.numbers[i]), "lamps_installed_at", "is after now")
        midnight = datetime.combine(on, time(0), tzinfo=UTC) if on is not None else None
        if g is None and midnight is not None and midnight > later:
            errors.add(
                int(c.numbers[i]), "installed_on", "is after today (give lamps_installed_at)"
            )
        at.append(g or midnight or now)
    out = FixtureCells(
        numbers=c.numbers,
        ok=np.ones(len(c), dtype=bool),
        site=text(c, "site", errors, max_len=200, required=True),
        area=text(c, "area", errors, max_len=200, required=True),
        tag=text(c, "tag", errors, max_len=64, required=True),
        location=text(c, "location", errors, max_len=300),
        lamp_type=text(c, "lamp_type", errors, max_len=40, required=True),
        lamps=cells.ints(c, "lamps_per_fixture", errors, lo=1, hi=64, default=1),
        ballast=cells.choices(c, "ballast_kind", errors, BALLASTS),
        volts=cells.floats(
            c,
            "measured_voltage_v",
            errors,
            lo=1,
            hi=1000,
            out_of_range="must lie in [1, 1000] volts",
        ),
        installed_on=installed_on,
        installed_at=at,
        hours=_zero_blank(
            cells.floats(
                c,
                "lamp_hours_at_install",
                errors,
                lo=0,
                hi=1_000_000,
                out_of_range="must lie in [0, 1,000,000] hours",
            )
        ),
        starts=_zero_blank(
            cells.floats(
                c,
                "lamp_starts_at_install",
                errors,
                lo=0,
                hi=100_000_000,  # the same range as FixtureCreate.lamp_starts_at_install
                out_of_range="must lie in [0, 100,000,000]",
            )
        ),
    )
    out.ok[np.isin(c.numbers, list(errors.bad_rows))] = False
    return out


def _zero_blank(x: NDArray[np.float64]) -> NDArray[np.float64]:
    return np.where(np.isnan(x), 0.0, x)


def load_names(session: Session, site_names: set[str]) -> Names:
    """Load: sites, areas and lamp types by name (one query each), and the sites' fixtures."""
    sites = {name: i for i, name in session.execute(select(Site.id, Site.name))}
    areas = {
        (s, name): i for i, s, name in session.execute(select(Area.id, Area.site_id, Area.name))
    }
    types = {
        code: (i, tech, ballast or TECHNOLOGY_DEFAULTS[tech].default_ballast)
        for i, code, tech, ballast in session.execute(
            select(LampType.id, LampType.code, LampType.technology, LampType.ballast_behaviour)
        )
    }
    site_ids = {sites[s] for s in site_names if s in sites}
    existing: dict[tuple[int, str], tuple[int, int]] = {}
    if site_ids:
        stmt = select(Fixture.id, Fixture.site_id, Fixture.tag, Fixture.lamps_per_fixture).where(
            Fixture.site_id.in_(site_ids)
        )
        existing = {(s, t): (i, k) for i, s, t, k in session.execute(stmt)}
    retired = session.scalars(select(Area.id).where(Area.retired_at.is_not(None)))
    return Names(
        sites=sites, areas=areas, types=types, existing=existing, retired_areas=frozenset(retired)
    )


def _resolve(f: FixtureCells, i: int, names: Names, errors: RowErrors) -> dict[str, Any] | None:
    """Row i's fixture values with ids, or None (errors recorded)."""
    n = int(f.numbers[i])
    site, area, code = str(f.site[i]), str(f.area[i]), str(f.lamp_type[i])
    site_id = names.sites.get(site)
    if site_id is None:
        errors.add(n, "site", f"no site named '{site}'")
        return None
    area_id = names.areas.get((site_id, area))
    if area_id is None:
        errors.add(n, "area", f"site '{site}' has no area named '{area}'")
    elif area_id in names.retired_areas:
        errors.add(n, "area", f"area '{area}' is retired", conflict=True)
        return None
    lt = names.types.get(code)
    if lt is None:
        errors.add(n, "lamp_type", f"no lamp type with code '{code}'")
    if area_id is None or lt is None:
        return None
    ballast = f.ballast[i] or lt[2]
    problem = ballast_problem(lt[1], ballast)
    if problem:
        errors.add(n, "ballast_kind", problem)
        return None
    volts = float(f.volts[i])
    return {
        "site_id": site_id,
        "area_id": area_id,
        "tag": f.tag[i],
        "location": f.location[i],
        "lamp_type_id": lt[0],
        "lamps_per_fixture": int(f.lamps[i]),
        "ballast_kind": ballast,
        "measured_voltage_v": None if np.isnan(volts) else volts,
        "installed_on": f.installed_on[i],
    }


def plan_import(
    *, f: FixtureCells, names: Names, on_duplicate: str, now: datetime, errors: RowErrors
) -> ImportPlan:
    """Compute: names to ids, tags unique in the file and (unless updating) in the site."""
    plan = ImportPlan(rows=len(f.numbers))
    seen: dict[tuple[int, str], int] = {}
    for i in np.nonzero(f.ok)[0].tolist():
        values = _resolve(f, i, names, errors)
        if values is None:
            continue
        n = int(f.numbers[i])
        key = (values["site_id"], values["tag"])
        if key in seen:
            errors.add(n, "tag", f"tag also on row {seen[key]} of this file")
            continue
        seen[key] = n
        if key not in names.existing:
            plan.new.append(i)
            plan.new_values.append(values)
            continue
        if on_duplicate == "error":
            errors.add(n, "tag", f"site '{f.site[i]}' already has this tag", conflict=True)
            continue
        fid, old_count = names.existing[key]
        plan.changed.append({**values, "b_id": fid, "updated_at": now})
        k = values["lamps_per_fixture"]
        if k > old_count:
            at, hrs, sts = f.installed_at[i], float(f.hours[i]), float(f.starts[i])
            plan.grow.extend(position_rows(fid, old_count + 1, k, at, hrs, sts))
        elif k < old_count:
            plan.shrink.append({"b_fid": fid, "b_keep": k})
    return plan


def _new_positions(f: FixtureCells, rows: list[int], ids: list[int]) -> dict[str, Any]:
    """Lamp position columns of new fixtures: positions 1..lamps of each (numpy repeats)."""
    idx = np.asarray(rows, dtype=np.int64)
    k = f.lamps[idx]
    first = np.repeat(np.cumsum(k) - k, k)
    at = np.array([f.installed_at[i].timestamp() for i in rows], dtype=np.float64)
    return {
        "fixture_id": np.repeat(np.asarray(ids, dtype=np.int64), k),
        "position_no": np.arange(int(k.sum()), dtype=np.int64) - first + 1,
        "lamp_installed_at": Epoch(np.repeat(at, k)),
        "hours_at_install": np.repeat(f.hours[idx], k),
        "starts_at_install": np.repeat(f.starts[idx], k),
    }


def write_import(
    session: Session, f: FixtureCells, plan: ImportPlan, now: datetime
) -> FixtureImportResult:
    """Write: new fixtures (ids back from the writer) and positions; updates; shrinks."""
    new_cols: dict[str, list[Any]] = {k: [v[k] for v in plan.new_values] for k in _value_names()}
    new_cols["created_at"] = new_cols["updated_at"] = [now] * len(plan.new)
    ids = write_rows(session, _FIXTURES, new_cols, return_ids=True) if plan.new else []
    conn = session.connection()
    chunk = get_settings().bulk_chunk_rows
    stmt_u = update(_FIXTURES).where(_FIXTURES.c.id == bindparam("b_id"))
    for i in range(0, len(plan.changed), chunk):
        conn.execute(stmt_u, plan.changed[i : i + chunk])
    if plan.shrink:
        stmt_d = delete(_POSITIONS).where(
            _POSITIONS.c.fixture_id == bindparam("b_fid"),
            _POSITIONS.c.position_no > bindparam("b_keep"),
        )
        conn.execute(stmt_d, plan.shrink)
    positions = _new_positions(f, plan.new, ids)
    write_rows(session, _POSITIONS, positions)
    if plan.grow:
        cols = [k for k in plan.grow[0] if k != "burned_out_at"]
        write_rows(session, _POSITIONS, {k: [g[k] for g in plan.grow] for k in cols})
    session.expire_all()  # rows changed behind the ORM's back
    return FixtureImportResult(
        rows=plan.rows,
        created=len(plan.new),
        updated=len(plan.changed),
        positions_created=len(positions["fixture_id"]) + len(plan.grow),
    )


def _value_names() -> tuple[str, ...]:
    return (
        "site_id",
        "area_id",
        "tag",
        "location",
        "lamp_type_id",
        "lamps_per_fixture",
        "ballast_kind",
        "measured_voltage_v",
        "installed_on",
    )


def import_fixtures(
    session: Session, c: Columns, on_duplicate: str = "error"
) -> FixtureImportResult:
    """Validate every row, then insert (and with on_duplicate='update' change) fixtures."""
    check_on_duplicate(on_duplicate)
    errors = RowErrors()
    now = utcnow()
    f = read_fixture_cells(c, errors, now)
    names = load_names(session, {s for s in f.site if s is not None})
    plan = plan_import(f=f, names=names, on_duplicate=on_duplicate, now=now, errors=errors)
    errors.raise_if_any("fixture import")
    return write_import(session, f, plan, now)
