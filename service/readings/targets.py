"""What a reading upload's rows point at: their fixtures or areas, sites and time zones.

Shared by the voltage (voltage_upload.py) and burn-hour (burn_hours.py) uploads. Each row
names a fixture or an area (an area row applies to every fixture of the area); unknown
fixtures or areas and readings in the future (beyond FUTURE_SKEW_S seconds of clock skew)
are refused.
"""

from __future__ import annotations

import numpy as np
from numpy.typing import NDArray
from sqlalchemy import select
from sqlalchemy.orm import Session

from service.config import get_settings
from service.register.models import Area, Fixture, Site
from service.uploads import cells
from service.uploads.errors import RowErrors
from service.uploads.parse import Columns

IntArray = NDArray[np.int64]
FloatArray = NDArray[np.float64]

FUTURE_SKEW_S = 300.0  # seconds of client clock skew tolerated


def _lookup(
    session: Session, model: type[Fixture] | type[Area], wanted: IntArray, lock: bool
) -> tuple[IntArray, IntArray, NDArray[np.object_]]:
    """Existing fixtures or areas among wanted: (sorted ids, their site ids, site time zones).

    lock: hold their rows (FOR NO KEY UPDATE, in id order) until the transaction ends, so
    two uploads for the same targets check what is stored one after the other.
    """
    found: list[tuple[int, int, str]] = []
    uniq = np.unique(wanted[wanted > 0]).tolist()
    chunk = get_settings().bulk_chunk_rows
    for i in range(0, len(uniq), chunk):
        stmt = (
            select(model.id, model.site_id, Site.time_zone)
            .join(Site, Site.id == model.site_id)
            .where(model.id.in_(uniq[i : i + chunk]))
            .order_by(model.id)
        )
        if lock:  # SQLite has no row locks; its writers queue on BEGIN IMMEDIATE instead
            stmt = stmt.with_for_update(key_share=True, of=model)  # FOR NO KEY UPDATE
        rows = session.execute(stmt).all()
        found.extend((int(r[0]), int(r[1]), str(r[2])) for r in rows)
    found.sort()
    ids = np.array([f[0] for f in found], dtype=np.int64)
    sites = np.array([f[1] for f in found], dtype=np.int64)
    zones = np.array([f[2] for f in found], dtype=object)
    return ids, sites, zones


def _match(
    wanted: IntArray, rows: NDArray[np.bool_], table: tuple[IntArray, IntArray, NDArray[np.object_]]
) -> tuple[NDArray[np.bool_], IntArray, NDArray[np.object_]]:
    """For rows naming an id: (found, site id, zone); searchsorted over the sorted ids."""
    ids, sites, zones = table
    if ids.size == 0:
        none = np.zeros(wanted.size, dtype=bool)
        return none, np.full(wanted.size, -1, dtype=np.int64), np.full(wanted.size, None, object)
    at = np.minimum(np.searchsorted(ids, wanted), ids.size - 1)
    found = rows & (ids[at] == wanted)
    return found, sites[at], zones[at]


def _retired_ids(session: Session, model: type[Fixture] | type[Area], wanted: IntArray) -> set[int]:
    """The retired ones among the wanted fixture or area ids (readings on them are refused)."""
    out: set[int] = set()
    uniq = np.unique(wanted[wanted > 0]).tolist()
    chunk = get_settings().bulk_chunk_rows
    for i in range(0, len(uniq), chunk):
        part = uniq[i : i + chunk]
        out.update(
            session.scalars(
                select(model.id).where(model.id.in_(part), model.retired_at.is_not(None))
            )
        )
    return out


def resolve_targets(
    session: Session, c: Columns, errors: RowErrors, *, lock: bool = False
) -> tuple[IntArray, IntArray, IntArray, list[str | None]]:
    """(fixture id or -1, area id or -1, site id, site time zone) per row; unknown ids are errors.

    The zone is what a timestamp without an offset is read in (the readings' naive-time rule).
    lock: lock the targets' rows (for a check of stored rows that decides the write).
    """
    fid = cells.ids(c, "fixture_id", errors)
    aid = cells.ids(c, "area_id", errors)
    errors.add_mask(
        c.numbers,
        (fid > 0) == (aid > 0),
        "fixture_id",
        "give either fixture_id or area_id, not both or neither",
    )
    by_fixture = (fid > 0) & (aid < 0)
    by_area = (aid > 0) & (fid < 0)
    site = np.full(len(c), -1, dtype=np.int64)
    zones = np.full(len(c), None, dtype=object)
    for ids, rows, model, field, label in (
        (fid, by_fixture, Fixture, "fixture_id", "fixture"),
        (aid, by_area, Area, "area_id", "area"),
    ):
        found, sites, zone = _match(ids, rows, _lookup(session, model, ids[rows], lock))
        site[found] = sites[found]
        zones[found] = zone[found]
        for i in np.nonzero(rows & ~found)[0].tolist():
            errors.add(int(c.numbers[i]), field, f"{label} {int(ids[i])} does not exist")
        retired = _retired_ids(session, model, ids[rows & found])
        if retired:  # readings on retired records are refused (409)
            for i in np.nonzero(rows & found & np.isin(ids, list(retired)))[0].tolist():
                errors.add(int(c.numbers[i]), field, f"{int(ids[i])} is retired", conflict=True)
    return fid, aid, site, zones.tolist()


def scatter_mask(n: int, order: IntArray, mask: NDArray[np.bool_]) -> NDArray[np.bool_]:
    """A mask over sorted rows (order) as a mask over the upload's rows."""
    out = np.zeros(n, dtype=bool)
    out[order[mask]] = True
    return out
