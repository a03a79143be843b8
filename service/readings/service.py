"""Rules shared by reading uploads, and voltage readings; uploads are all rows or none.

Each row names a fixture or an area (an area row applies to every fixture of the area);
unknown fixtures or areas and readings in the future (beyond FUTURE_SKEW_S seconds of
clock skew) are refused. Voltage readings lie in [MIN_VOLTS, MAX_VOLTS] volts. Burn-hour
records are in burn_hours.py.
"""

from __future__ import annotations

import time
from collections.abc import Sequence

import numpy as np
from numpy.typing import NDArray
from sqlalchemy import select
from sqlalchemy.orm import Session

from service.api.bulk import RowErrors
from service.readings import columns as colmod
from service.readings.columns import Columns
from service.readings.models import VoltageReading
from service.readings.store import bulk_insert
from service.register.models import Area, Fixture, Site

IntArray = NDArray[np.int64]
FloatArray = NDArray[np.float64]

VOLTAGE_COLUMNS = ("fixture_id", "area_id", "measured_at", "volts", "note")
FUTURE_SKEW_S = 300.0  # seconds of client clock skew tolerated
MAX_VOLTS = 1000.0
# A reading below 1 V is no supply a lamp runs on; near zero it overflows the power laws.
MIN_VOLTS = 1.0
_CHUNK = 10_000


def _lookup(
    session: Session, model: type[Fixture] | type[Area], wanted: IntArray
) -> dict[int, tuple[int, int, str]]:
    """id -> (site id, area id, site time zone) for existing fixtures or areas."""
    out: dict[int, tuple[int, int, str]] = {}
    uniq = np.unique(wanted[wanted > 0]).tolist()
    area_col = Fixture.area_id if model is Fixture else Area.id
    for i in range(0, len(uniq), _CHUNK):
        part = uniq[i : i + _CHUNK]
        rows = session.execute(
            select(model.id, model.site_id, area_col, Site.time_zone)
            .join(Site, Site.id == model.site_id)
            .where(model.id.in_(part))
        ).all()
        for r in rows:
            out[int(r[0])] = (int(r[1]), int(r[2]), str(r[3]))
    return out


def _retired_ids(session: Session, model: type[Fixture] | type[Area], wanted: IntArray) -> set[int]:
    """The retired ones among the wanted fixture or area ids (readings on them are refused)."""
    out: set[int] = set()
    uniq = np.unique(wanted[wanted > 0]).tolist()
    for i in range(0, len(uniq), _CHUNK):
        part = uniq[i : i + _CHUNK]
        out.update(
            session.scalars(
                select(model.id).where(model.id.in_(part), model.retired_at.is_not(None))
            )
        )
    return out


def resolve_targets(
    session: Session, c: Columns, errors: RowErrors
) -> tuple[IntArray, IntArray, IntArray, list[str | None]]:
    """(fixture id or -1, area id or -1, site id, zone) per row; unknown ids are errors."""
    fid = colmod.ids(c, "fixture_id", errors)
    aid = colmod.ids(c, "area_id", errors)
    both = (fid > 0) & (aid > 0)
    neither = (fid < 0) & (aid < 0)
    for i in np.nonzero(both | neither)[0]:
        errors.add(
            int(c.numbers[i]),
            "fixture_id",
            "give either fixture_id or area_id, not both or neither",
        )
    fx = _lookup(session, Fixture, fid)
    ar = _lookup(session, Area, aid)
    retired = {"fixture_id": _retired_ids(session, Fixture, fid)}
    retired["area_id"] = _retired_ids(session, Area, aid)
    n = len(c)
    site = np.full(n, -1, dtype=np.int64)
    zones: list[str | None] = [None] * n
    fl: list[int] = fid.tolist()
    al: list[int] = aid.tolist()
    for row in range(n):  # a dict lookup per row: ids come as arbitrary integers
        if fl[row] > 0 and al[row] < 0:
            hit = fx.get(fl[row])
            if hit is None:
                errors.add(int(c.numbers[row]), "fixture_id", f"fixture {fl[row]} does not exist")
                continue
            site[row] = hit[0]
            zones[row] = hit[2]
        elif al[row] > 0 and fl[row] < 0:
            hit = ar.get(al[row])
            if hit is None:
                errors.add(int(c.numbers[row]), "area_id", f"area {al[row]} does not exist")
                continue
            site[row] = hit[0]
            zones[row] = hit[2]
        for field, ids in retired.items():
            target = fl[row] if field == "fixture_id" else al[row]
            if target in ids:
                errors.add(int(c.numbers[row]), field, f"{target} is retired", conflict=True)
    return fid, aid, site, zones


def flag_rows(
    errors: RowErrors,
    c: Columns,
    mask: NDArray[np.bool_],
    field: str,
    message: str,
    *,
    conflict: bool = False,
) -> None:
    """Add one row error per row where mask is true."""
    for i in np.nonzero(mask)[0].tolist():
        errors.add(int(c.numbers[i]), field, message, conflict=conflict)


def scatter_mask(n: int, order: IntArray, mask: NDArray[np.bool_]) -> NDArray[np.bool_]:
    """A mask over sorted rows (order) as a mask over the upload's rows."""
    out = np.zeros(n, dtype=bool)
    out[order[mask]] = True
    return out


def ingest_voltages(session: Session, c: Columns, *, now: float | None = None) -> int:
    """Validate and store voltage readings (all or none); returns how many were stored."""
    now = time.time() if now is None else now
    errors = RowErrors()
    fid, aid, site, zones = resolve_targets(session, c, errors)
    at = colmod.timestamps(c, "measured_at", zones, errors)
    volts = colmod.floats(c, "volts", errors, required=True)
    notes = [None if v is None else str(v) for v in c.get("note")]
    flag_rows(
        errors,
        c,
        np.isnan(at) & np.array([v is None for v in c.get("measured_at")], dtype=bool),
        "measured_at",
        "is required",
    )
    flag_rows(errors, c, at > now + FUTURE_SKEW_S, "measured_at", "is in the future")
    flag_rows(
        errors,
        c,
        ~np.isnan(volts) & ((volts < MIN_VOLTS) | (volts > MAX_VOLTS)),
        "volts",
        f"must lie in [{MIN_VOLTS:g}, {MAX_VOLTS:g}] volts",
    )
    flag_rows(
        errors,
        c,
        np.array([v is not None and len(v) > 300 for v in notes], dtype=bool),
        "note",
        "at most 300 characters",
    )
    errors.raise_if_any("voltage upload")
    return bulk_insert(
        session,
        VoltageReading.__table__,  # type: ignore[arg-type]
        ("site_id", "area_id", "fixture_id", "measured_at", "volts", "note"),
        (
            site,
            aid,
            fid,
            at,
            volts,
            notes,
        ),
        ("int", "int", "int", "ts", "float", "str"),
    )


def columns_from_dicts(rows: Sequence[dict[str, object]], allowed: Sequence[str]) -> Columns:
    """Rows given as dicts (e.g. one JSON body) as columns numbered from 1."""
    return Columns(
        allowed,
        {name: [r.get(name) for r in rows] for name in allowed},
        np.arange(1, len(rows) + 1, dtype=np.int64),
    )
