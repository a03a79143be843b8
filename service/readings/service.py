"""Rules shared by reading uploads, and voltage readings; uploads are all rows or none.

Each row names a fixture or an area (an area row applies to every fixture of the area);
unknown fixtures or areas and readings in the future (beyond FUTURE_SKEW_S seconds of
clock skew) are refused. Voltage readings lie in [MIN_VOLTS, MAX_VOLTS] volts. Burn-hour
records are in burn_hours.py.
"""

from __future__ import annotations

import time

import numpy as np
from numpy.typing import NDArray
from sqlalchemy import select
from sqlalchemy.orm import Session

from service.config import get_settings
from service.readings.models import VoltageReading
from service.register.models import Area, Fixture, Site
from service.uploads import cells
from service.uploads.errors import RowErrors
from service.uploads.parse import Columns, UploadSpec
from service.uploads.write import Epoch, write_rows

IntArray = NDArray[np.int64]
FloatArray = NDArray[np.float64]

VOLTAGE_COLUMNS = ("fixture_id", "area_id", "measured_at", "volts", "note")
VOLTAGE_UPLOAD = UploadSpec(columns=VOLTAGE_COLUMNS)
FUTURE_SKEW_S = 300.0  # seconds of client clock skew tolerated
MAX_VOLTS = 1000.0
# A reading below 1 V is no supply a lamp runs on; near zero it overflows the power laws.
MIN_VOLTS = 1.0


def _lookup(
    session: Session, model: type[Fixture] | type[Area], wanted: IntArray
) -> dict[int, tuple[int, int, str]]:
    """id -> (site id, area id, site time zone) for existing fixtures or areas."""
    out: dict[int, tuple[int, int, str]] = {}
    uniq = np.unique(wanted[wanted > 0]).tolist()
    area_col = Fixture.area_id if model is Fixture else Area.id
    chunk = get_settings().bulk_chunk_rows
    for i in range(0, len(uniq), chunk):
        part = uniq[i : i + chunk]
        rows = session.execute(
            select(model.id, model.site_id, area_col, Site.time_zone)
            .join(Site, Site.id == model.site_id)
            .where(model.id.in_(part))
        ).all()
        for r in rows:
            out[int(r[0])] = (int(r[1]), int(r[2]), str(r[3]))
    return out


def resolve_targets(
    session: Session, c: Columns, errors: RowErrors
) -> tuple[IntArray, IntArray, IntArray, list[str | None]]:
    """(fixture id or -1, area id or -1, site id, site time zone) per row; unknown ids are errors.

    The zone is what a timestamp without an offset is read in (the readings' naive-time rule).
    """
    fid = cells.ids(c, "fixture_id", errors)
    aid = cells.ids(c, "area_id", errors)
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
    return fid, aid, site, zones


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
    at = cells.timestamps(c, "measured_at", errors, zones)
    volts = cells.floats(
        c,
        "volts",
        errors,
        required=True,
        lo=MIN_VOLTS,
        hi=MAX_VOLTS,
        out_of_range=f"must lie in [{MIN_VOLTS:g}, {MAX_VOLTS:g}] volts",
    )
    notes = cells.texts(c, "note", errors, max_len=300)
    errors.add_mask(c.numbers, ~c.given("measured_at"), "measured_at", "is required")
    errors.add_mask(c.numbers, at > now + FUTURE_SKEW_S, "measured_at", "is in the future")
    errors.raise_if_any("voltage upload")
    write_rows(
        session,
        VoltageReading.__table__,  # type: ignore[arg-type]
        {
            "site_id": site,
            "area_id": aid,
            "fixture_id": fid,
            "measured_at": Epoch(at),
            "volts": volts,
            "note": notes,
        },
    )
    return len(c)
