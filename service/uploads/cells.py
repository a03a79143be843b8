"""Step 2 of every upload: raw cells to typed columns, each bad cell a row-numbered error.

One reader per kind of cell, for every endpoint, with one wording (the field is named in
the error's "field", so messages do not repeat it):
- numbers: "must be a number, not 'abc'", "must be a finite number" (booleans refused);
- whole numbers and ids: "must be a whole number", "must be a positive whole number";
- booleans (read here and nowhere else): true/false, yes/no, y/n, t/f, 1/0 in any case,
  or a JSON boolean; otherwise "must be true or false";
- dates: ISO YYYY-MM-DD; timestamps: ISO 8601;
- the naive-time rule: a timestamp without a UTC offset is wall-clock time in the zone
  the caller gives per row. Readings (burn hours, voltages) pass their site's IANA zone,
  as their API documents; with no zone (the fixture import, like POST /fixtures) it is
  UTC. A local time the clocks skip (a DST gap) is refused, naming the row;
- a blank cell is None: "is required" where the column must have a value.
Numeric columns are converted by numpy in one call; only when that fails are the cells
read one by one to name the bad rows. Repeated date and time cells are parsed once.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Sequence
from datetime import UTC, date, datetime, timedelta
from typing import Any, TypeVar
from zoneinfo import ZoneInfo

import numpy as np
from numpy.typing import NDArray

from service.api.times import in_zone, year_problem
from service.uploads.errors import RowErrors
from service.uploads.parse import Columns

FloatArray = NDArray[np.float64]
IntArray = NDArray[np.int64]
BoolArray = NDArray[np.bool_]
T = TypeVar("T")

TRUE_WORDS = frozenset(("true", "yes", "y", "t", "1"))
FALSE_WORDS = frozenset(("false", "no", "n", "f", "0"))


class CellError(ValueError):
    """A cell that cannot be read; the message says why."""


def _shown(v: Any) -> str:
    """A cell as quoted in a message (JSON booleans as true/false)."""
    if isinstance(v, bool):
        return "true" if v else "false"
    return str(v)


def number(v: Any) -> float:
    """One finite number from a CSV or JSON cell (booleans refused); CellError otherwise."""
    if isinstance(v, bool):
        raise CellError(f"must be a number, not '{_shown(v)}'")
    try:
        x = float(v)
    except (TypeError, ValueError):
        raise CellError(f"must be a number, not '{_shown(v)}'") from None
    if not math.isfinite(x):
        raise CellError("must be a finite number")
    return x


def boolean(v: Any) -> bool:
    """One true/false cell (the only boolean reader); CellError otherwise."""
    if isinstance(v, bool):
        return v
    s = str(v).strip().lower()
    if s in TRUE_WORDS:
        return True
    if s in FALSE_WORDS:
        return False
    raise CellError("must be true or false")


def floats(
    c: Columns,
    name: str,
    errors: RowErrors,
    *,
    required: bool = False,
    lo: float | None = None,
    hi: float | None = None,
    out_of_range: str = "",
) -> FloatArray:
    """A numeric column; NaN where blank or bad. lo/hi: the allowed range (inclusive)."""
    if not c.has(name):
        if required:
            errors.add_mask(c.numbers, np.ones(len(c), dtype=bool), name, "is required")
        return np.full(len(c), np.nan)
    raw = c.get(name)
    try:  # numpy reads number text and JSON numbers in C; None becomes NaN
        if bool in set(map(type, raw)):
            raise TypeError
        out = np.array(raw, dtype=np.float64)
        if out.ndim != 1:
            raise TypeError
    except (ValueError, TypeError):
        out = np.full(len(raw), np.nan)
        for i, v in enumerate(raw):
            if v is not None:
                try:
                    out[i] = number(v)
                except CellError as exc:
                    errors.add(int(c.numbers[i]), name, str(exc))
        return _ranged(c, name, errors, out, raw, required, lo, hi, out_of_range)
    # "nan" and "inf" parse: refuse them (a NaN where the cell was blank is fine).
    nonfinite = ~np.isfinite(out)
    if nonfinite.any():
        nonfinite &= np.fromiter((v is not None for v in raw), dtype=bool, count=len(raw))
        errors.add_mask(c.numbers, nonfinite, name, "must be a finite number")
        out[nonfinite] = np.nan
    return _ranged(c, name, errors, out, raw, required, lo, hi, out_of_range)


def _ranged(
    c: Columns,
    name: str,
    errors: RowErrors,
    out: FloatArray,
    raw: Sequence[Any],
    required: bool,
    lo: float | None,
    hi: float | None,
    out_of_range: str,
) -> FloatArray:
    if required and np.isnan(out).any():
        blank = np.fromiter((v is None for v in raw), dtype=bool, count=len(raw))
        errors.add_mask(c.numbers, blank, name, "is required")
    if lo is not None or hi is not None:
        with np.errstate(invalid="ignore"):
            bad = (out < (-np.inf if lo is None else lo)) | (out > (np.inf if hi is None else hi))
        errors.add_mask(c.numbers, bad, name, out_of_range or f"must lie in [{lo}, {hi}]")
        out[bad] = np.nan
    return out


def ints(c: Columns, name: str, errors: RowErrors, *, lo: int, hi: int, default: int) -> IntArray:
    """A whole-number column in [lo, hi] ("3", 3 and 3.0 read as 3); default where blank."""
    x = floats(c, name, errors)
    frac = ~np.isnan(x) & (x != np.round(x))
    errors.add_mask(c.numbers, frac, name, "must be a whole number")
    with np.errstate(invalid="ignore"):
        out = ~np.isnan(x) & ~frac & ((x < lo) | (x > hi))
    errors.add_mask(c.numbers, out, name, f"must lie in [{lo}, {hi}]")
    return np.where(np.isnan(x) | frac | out, default, x).astype(np.int64)


def ids(c: Columns, name: str, errors: RowErrors) -> IntArray:
    """An id column (1 to 2**31 - 1); -1 where blank or bad."""
    x = floats(c, name, errors)
    with np.errstate(invalid="ignore"):
        bad = ~np.isnan(x) & ((x != np.round(x)) | (x < 1) | (x > 2**31 - 1))
    errors.add_mask(c.numbers, bad, name, "must be a positive whole number")
    return np.where(np.isnan(x) | bad, -1, x).astype(np.int64)


def bools(c: Columns, name: str, errors: RowErrors) -> BoolArray:
    """A true/false column; False where blank."""
    if not c.has(name):
        return np.zeros(len(c), dtype=bool)
    return np.array([bool(v) for v in optional_bools(c, name, errors)], dtype=bool)


def optional_bools(c: Columns, name: str, errors: RowErrors) -> list[bool | None]:
    """A true/false column; None where blank or bad."""
    return _each(c, name, errors, None, lambda v, _zone: boolean(v))


def texts(
    c: Columns, name: str, errors: RowErrors, *, max_len: int, required: bool = False
) -> list[str | None]:
    """A text column of at most max_len characters; None where blank."""
    raw = c.get(name)
    out: list[str | None] = [None if v is None else str(v) for v in raw]
    for i, s in enumerate(out):
        if s is None:
            if required:
                errors.add(int(c.numbers[i]), name, "is required")
        elif len(s) > max_len:
            errors.add(int(c.numbers[i]), name, f"is longer than {max_len} characters")
    return out


def choices(c: Columns, name: str, errors: RowErrors, allowed: Sequence[str]) -> list[str | None]:
    """A column of one of the allowed words; None where blank."""
    out: list[str | None] = []
    for i, v in enumerate(c.get(name)):
        if v is not None and str(v) not in allowed:
            errors.add(int(c.numbers[i]), name, f"must be one of: {', '.join(allowed)}")
            v = None
        out.append(None if v is None else str(v))
    return out


def _each(
    c: Columns,
    name: str,
    errors: RowErrors,
    zones: Sequence[str | None] | None,
    parse: Callable[[Any, str | None], T],
) -> list[T | None]:
    """parse(cell, zone) per non-blank cell, cached per (cell, zone); CellError is recorded."""
    cache: dict[tuple[Any, str | None], T] = {}
    out: list[T | None] = []
    if not c.has(name):
        return [None] * len(c)
    for i, v in enumerate(c.get(name)):
        if v is None:
            out.append(None)
            continue
        zone = zones[i] if zones is not None else None
        key = (v, zone)
        cacheable = not isinstance(v, list | dict)  # a JSON array or object: no hash, never valid
        hit = cache.get(key) if cacheable else None
        if hit is None:
            try:
                hit = parse(v, zone)
            except CellError as exc:
                errors.add(int(c.numbers[i]), name, str(exc))
            else:
                if cacheable:
                    cache[key] = hit
        out.append(hit)
    return out


D = TypeVar("D", date, datetime)


def _iso(v: Any, kind: type[D], wanted: str) -> D:
    """An ISO date or date-time cell (or a value already of that kind) in the accepted years."""
    try:
        d = v if isinstance(v, kind) else kind.fromisoformat(str(v))
    except ValueError:
        raise CellError(f"must be {wanted}, not '{_shown(v)}'") from None
    problem = year_problem(d)
    if problem:
        raise CellError(problem)
    return d


def read_date(v: Any, _zone: str | None = None) -> date:
    """One ISO date cell, YYYY-MM-DD, in the accepted years."""
    return _iso(v, date, "a date YYYY-MM-DD")


def read_timestamp(v: Any, zone: str | None = None) -> datetime:
    """One ISO 8601 timestamp cell as aware UTC; no offset: wall-clock time in zone (UTC)."""
    dt = _iso(v, datetime, "an ISO 8601 date-time")
    if dt.tzinfo is None:
        try:
            dt = in_zone(dt, ZoneInfo(zone or "UTC"))
        except ValueError as exc:  # a DST gap
            raise CellError(str(exc)) from None
    return dt.astimezone(UTC)


def dates(c: Columns, name: str, errors: RowErrors) -> list[date | None]:
    """A date column; None where blank or bad."""
    return _each(c, name, errors, None, read_date)


def datetimes(
    c: Columns, name: str, errors: RowErrors, zones: Sequence[str | None] | None = None
) -> list[datetime | None]:
    """A timestamp column as aware UTC datetimes; None where blank or bad (zones: per row)."""
    return _each(c, name, errors, zones, read_timestamp)


def timestamps(
    c: Columns, name: str, errors: RowErrors, zones: Sequence[str | None] | None = None
) -> FloatArray:
    """A timestamp column as epoch seconds; NaN where blank or bad (zones: per row)."""
    if not c.has(name):
        return np.full(len(c), np.nan)
    cells = _each(c, name, errors, zones, lambda v, z: read_timestamp(v, z).timestamp())
    return np.array([np.nan if t is None else t for t in cells], dtype=np.float64)


def _day_span(v: Any, zone: str | None) -> tuple[float, float]:
    d = read_date(v)
    tz = ZoneInfo(zone or "UTC")
    a = datetime(d.year, d.month, d.day, tzinfo=tz)
    b = datetime.combine(d + timedelta(days=1), datetime.min.time(), tzinfo=tz)
    return a.timestamp(), b.timestamp()


def days(
    c: Columns, name: str, errors: RowErrors, zones: Sequence[str | None] | None = None
) -> tuple[FloatArray, FloatArray]:
    """A calendar-day column in each row's zone as (start, end) epoch seconds; NaN if blank."""
    if not c.has(name):
        return np.full(len(c), np.nan), np.full(len(c), np.nan)
    spans = _each(c, name, errors, zones, _day_span)
    start = np.array([np.nan if s is None else s[0] for s in spans], dtype=np.float64)
    end = np.array([np.nan if s is None else s[1] for s in spans], dtype=np.float64)
    return start, end


def json_values(c: Columns, name: str, errors: RowErrors, example: str) -> list[Any]:
    """A column of JSON lists or objects: inline JSON text (CSV) or JSON values as given."""
    import json

    out: list[Any] = []
    for i, v in enumerate(c.get(name)):
        if isinstance(v, str):
            try:
                v = json.loads(v)
            except ValueError:
                errors.add(int(c.numbers[i]), name, f"must be JSON, e.g. {example}")
                v = None
        out.append(v)
    return out
