"""Column-wise parsing of uploaded rows (CSV text or JSON values) into numpy arrays.

Every parser returns the array and records bad cells in a RowErrors with the row number,
so a whole upload is checked before anything is stored.
"""

from __future__ import annotations

import csv
import io
from collections.abc import Callable, Iterator, Sequence
from datetime import date, datetime, timedelta
from typing import Any, TypeVar
from zoneinfo import ZoneInfo

import numpy as np
from numpy.typing import NDArray

from service.api.bulk import RawBody, RowErrors, UnsupportedMediaType, parse_json
from service.api.errors import Invalid, TooLarge
from service.api.times import in_zone, year_problem
from service.config import get_settings

FloatArray = NDArray[np.float64]
IntArray = NDArray[np.int64]
T = TypeVar("T")


class Columns:
    """Uploaded rows as columns of raw cells (str, number or None) with row numbers."""

    def __init__(self, names: Sequence[str], cols: dict[str, list[Any]], numbers: IntArray):
        self.names = list(names)
        self.cols = cols
        self.numbers = numbers

    def __len__(self) -> int:
        return int(self.numbers.size)

    def get(self, name: str) -> list[Any]:
        """The raw cells of a column (all None when the column is absent)."""
        return self.cols.get(name) or [None] * len(self)


def read_columns(body: RawBody, allowed: Sequence[str]) -> Columns:
    """Parse a CSV (header first) or JSON list upload into columns; 415/413/422 as due."""
    if body.media_type == "application/json" or body.media_type.endswith("+json"):
        rows = parse_json(body.data, allowed)
        cols = {c: [r.data.get(c) for r in rows] for c in allowed}
        return Columns(allowed, cols, np.array([r.number for r in rows], dtype=np.int64))
    if body.media_type not in ("text/csv", "application/csv", "text/plain"):
        raise UnsupportedMediaType(
            f"Send the rows as text/csv or application/json, not '{body.media_type or 'nothing'}'."
        )
    try:
        text = body.data.decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        raise Invalid(f"The CSV upload must be UTF-8 text: {exc}.") from None
    reader = csv.reader(io.StringIO(text))
    try:
        header = [h.strip() for h in next(reader, [])]
    except csv.Error as exc:
        raise Invalid(f"The CSV header cannot be read: {exc}.") from None
    if not header:
        raise Invalid("The CSV upload is empty: give a header line and rows.")
    errors = RowErrors()
    for h in header:
        if h not in allowed:
            errors.add(1, h, f"unknown column; expected some of: {', '.join(allowed)}")
    if len(set(header)) != len(header):
        errors.add(1, None, "a column is named twice")
    errors.raise_if_any("CSV header")
    try:
        body_rows = list(reader)
    except csv.Error as exc:  # e.g. a bare carriage return inside an unquoted cell
        raise Invalid(
            f"The CSV upload cannot be read at line {reader.line_num}: {exc}.",
            errors=[{"row": reader.line_num, "field": None, "message": str(exc)}],
        ) from None
    numbers = np.arange(2, len(body_rows) + 2, dtype=np.int64)
    # Blank lines (no cells, or only empty cells) are skipped; any() runs in C.
    keep = [i for i, r in enumerate(body_rows) if any(r)]
    if len(keep) != len(body_rows):
        body_rows = [body_rows[i] for i in keep]
        numbers = numbers[keep]
    limit = get_settings().max_bulk_rows
    if len(body_rows) > limit:
        raise TooLarge(f"The upload has {len(body_rows)} rows; at most {limit} are accepted.")
    width = len(header)
    for n, r in zip(numbers.tolist(), body_rows, strict=True):
        if len(r) != width:
            errors.add(n, None, f"{len(r)} cells but the header has {width} columns")
    errors.raise_if_any("CSV upload")
    transposed = list(zip(*body_rows, strict=True)) if body_rows else [()] * width
    cols = {h: _clean(col) for h, col in zip(header, transposed, strict=True)}
    return Columns(header, cols, numbers)


def _clean(col: Sequence[str]) -> list[Any]:
    """Cells stripped, empty ones None (map and str methods run in C)."""
    stripped = list(map(str.strip, col))
    if all(stripped):
        return stripped
    return [c or None for c in stripped]


def floats(c: Columns, name: str, errors: RowErrors, *, required: bool = False) -> FloatArray:
    """A numeric column; NaN where empty (an error when required)."""
    raw = c.get(name)
    try:
        out = np.array([np.nan if v is None or v == "" else v for v in raw], dtype=np.float64)
    except (ValueError, TypeError):
        out = np.empty(len(raw))
        for i, v in enumerate(raw):
            try:
                out[i] = np.nan if v is None or v == "" else float(v)
                if isinstance(v, bool):
                    raise ValueError
            except (ValueError, TypeError):
                errors.add(int(c.numbers[i]), name, f"'{v}' is not a number")
                out[i] = np.nan
    bad = ~np.isfinite(out) & ~np.isnan(out)
    for i in np.nonzero(bad)[0][:1000]:
        errors.add(int(c.numbers[i]), name, "must be a finite number")
    if required:
        for i in np.nonzero(np.isnan(out))[0][:1000]:
            if raw[i] is None or raw[i] == "":
                errors.add(int(c.numbers[i]), name, "is required")
    return out


def ids(c: Columns, name: str, errors: RowErrors) -> IntArray:
    """An id column; -1 where empty."""
    vals = floats(c, name, errors)
    bad = ~np.isnan(vals) & ((vals != np.round(vals)) | (vals < 1))
    for i in np.nonzero(bad)[0][:1000]:
        errors.add(int(c.numbers[i]), name, "must be a positive whole number")
    return np.where(np.isnan(vals) | bad, -1, vals).astype(np.int64)


def bools(c: Columns, name: str, errors: RowErrors) -> NDArray[np.bool_]:
    """A true/false column; False where empty."""
    out = np.zeros(len(c), dtype=bool)
    for i, v in enumerate(c.get(name)):
        if v is None or v == "":
            continue
        if isinstance(v, bool):
            out[i] = v
            continue
        s = str(v).strip().lower()
        if s in ("true", "yes", "1", "t", "y"):
            out[i] = True
        elif s not in ("false", "no", "0", "f", "n"):
            errors.add(int(c.numbers[i]), name, "must be true or false")
    return out


def _zoned_cells(
    c: Columns,
    name: str,
    zones: Sequence[str | None],
    errors: RowErrors,
    parse: Callable[[Any, str | None], tuple[T | None, str | None]],
) -> Iterator[tuple[int, T]]:
    """(row index, parsed value) for each non-empty cell; parse gives (value, problem).

    Parsed values are cached per (cell, zone); a problem is recorded against the row.
    """
    cache: dict[tuple[Any, str | None], T] = {}
    for i, v in enumerate(c.get(name)):
        if v is None or v == "":
            continue
        key = (v, zones[i])
        hit = cache.get(key)
        if hit is None:
            hit, problem = parse(v, zones[i])
            if hit is None:
                errors.add(int(c.numbers[i]), name, problem or "is not valid")
                continue
            cache[key] = hit
        yield i, hit


def _timestamp(v: Any, zone: str | None) -> tuple[float | None, str | None]:
    try:
        dt = v if isinstance(v, datetime) else datetime.fromisoformat(str(v))
    except ValueError:
        return None, f"'{v}' is not an ISO 8601 timestamp"
    problem = year_problem(dt)
    if problem is None and dt.tzinfo is None:
        try:
            dt = in_zone(dt, ZoneInfo(zone or "UTC"))
        except ValueError as exc:
            problem = str(exc)
    if problem is not None:
        return None, problem
    return dt.timestamp(), None


def _day(v: Any, zone_name: str | None) -> tuple[tuple[float, float] | None, str | None]:
    try:
        d = v if isinstance(v, date) else date.fromisoformat(str(v))
    except ValueError:
        return None, f"'{v}' is not a date (YYYY-MM-DD)"
    problem = year_problem(d)
    if problem is not None:
        return None, problem
    zone = ZoneInfo(zone_name or "UTC")
    a = datetime(d.year, d.month, d.day, tzinfo=zone)
    b = datetime.combine(d + timedelta(days=1), datetime.min.time(), tzinfo=zone)
    return (a.timestamp(), b.timestamp()), None


def timestamps(c: Columns, name: str, zones: Sequence[str | None], errors: RowErrors) -> FloatArray:
    """ISO 8601 timestamps as epoch seconds; NaN where empty. No offset = the site's zone."""
    out = np.full(len(c.get(name)), np.nan)
    for i, t in _zoned_cells(c, name, zones, errors, _timestamp):
        out[i] = t
    return out


def days(
    c: Columns, name: str, zones: Sequence[str | None], errors: RowErrors
) -> tuple[FloatArray, FloatArray]:
    """A calendar-day column (YYYY-MM-DD, in the site's zone) as (start, end) epoch seconds."""
    n = len(c.get(name))
    start = np.full(n, np.nan)
    end = np.full(n, np.nan)
    for i, (a, b) in _zoned_cells(c, name, zones, errors, _day):
        start[i], end[i] = a, b
    return start, end
