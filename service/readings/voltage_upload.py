"""Voltage readings uploaded (one or many): all rows or none.

Each row names a fixture or an area (service.readings.targets); readings lie in
[MIN_VOLTS, MAX_VOLTS] volts and not in the future. Services flush; the caller commits.
"""

from __future__ import annotations

import time

from sqlalchemy.orm import Session

from service.readings.models import VoltageReading
from service.readings.targets import FUTURE_SKEW_S, resolve_targets
from service.uploads import cells
from service.uploads.errors import RowErrors
from service.uploads.parse import Columns, UploadSpec
from service.uploads.write import Epoch, write_rows

VOLTAGE_COLUMNS = ("fixture_id", "area_id", "measured_at", "volts", "note")
VOLTAGE_UPLOAD = UploadSpec(columns=VOLTAGE_COLUMNS)
MAX_VOLTS = 1000.0
# A reading below 1 V is no supply a lamp runs on; near zero it overflows the power laws.
MIN_VOLTS = 1.0


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
