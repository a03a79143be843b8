"""Step 1 of every upload: bytes and a media type in, columns of raw cells with row numbers out.

The rules, the same for every bulk endpoint:
- media type: text/csv (also application/csv, text/plain) or application/json (and any
  +json type); anything else is 415;
- decoding: UTF-8, a leading byte-order mark is dropped (spreadsheets write one);
- CSV: the header is line 1; names are stripped, must be known to the endpoint, may not
  repeat or be empty, and must include the endpoint's required columns; every row must
  have exactly as many cells as the header (a short or a long row is refused, naming it);
  lines with only blank cells are skipped (their numbers still count);
- JSON: a list of objects with known keys, the first numbered 1;
- cells: text is stripped, a blank cell is None; JSON numbers and booleans stay as given;
- size: more than `max_bulk_rows` rows is 413; an empty body is 422.
Rows are numbered as a person counts them: the CSV line (header = 1), the JSON list item.
"""

from __future__ import annotations

import csv
import io
import json
from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np
from numpy.typing import NDArray

from service.api.bulk import RawBody, media_of  # re-exported: the body as HTTP hands it in
from service.api.errors import Invalid, TooLarge
from service.config import get_settings
from service.uploads.errors import RowErrors, UnsupportedMediaType

CSV_TYPES = ("text/csv", "application/csv", "text/plain")
JSON_TYPES = ("application/json",)
IntArray = NDArray[np.int64]
BOM = b"\xef\xbb\xbf"  # UTF-8 byte-order mark, dropped by the utf-8-sig decoding


@dataclass(frozen=True, kw_only=True)
class UploadSpec:
    """What one endpoint accepts: its columns and those a CSV header must name."""

    columns: tuple[str, ...]
    required: tuple[str, ...] = ()


class Columns:
    """Uploaded rows as columns of raw cells (str, JSON value or None) with row numbers."""

    def __init__(self, names: Sequence[str], cols: dict[str, list[Any]], numbers: IntArray):
        self.names = list(names)
        self.cols = cols
        self.numbers = numbers

    def __len__(self) -> int:
        return int(self.numbers.size)

    def get(self, name: str) -> list[Any]:
        """The raw cells of a column (all None when the column is absent)."""
        col = self.cols.get(name)
        return col if col is not None else [None] * len(self)

    def has(self, name: str) -> bool:
        """Whether the upload has the column (a JSON key given in some row, a CSV header)."""
        return name in self.cols

    def given(self, name: str) -> NDArray[np.bool_]:
        """True where the column has a cell (not blank)."""
        if name not in self.cols:
            return np.zeros(len(self), dtype=bool)
        return np.fromiter((v is not None for v in self.cols[name]), dtype=bool, count=len(self))

    def row(self, i: int) -> dict[str, Any]:
        """Row i (0-based) as a dict of its given cells."""
        return {k: col[i] for k, col in self.cols.items() if col[i] is not None}


def read_upload(body: RawBody, spec: UploadSpec) -> Columns:
    """Parse an upload by its media type into columns (415, 413 or 422 as due)."""
    media = media_of(body.media_type)
    is_json = media in JSON_TYPES or media.endswith("+json")
    if not is_json and media not in CSV_TYPES:
        raise UnsupportedMediaType(
            f"Send the rows as text/csv or application/json, not '{media or 'nothing'}'."
        )
    try:
        text = body.data.decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        raise Invalid(f"The upload must be UTF-8 text: {exc}.") from None
    if not text.strip():
        what = (
            "JSON upload is empty: give a list of objects"
            if is_json
            else ("CSV upload is empty: give a header line and rows")
        )
        empty = {"row": 1, "field": None, "in": "body", "message": "the upload is empty"}
        raise Invalid(f"The {what}.", errors=[empty])
    return _json_columns(text, spec) if is_json else _csv_columns(text, spec, body.data)


def read_path(path: str, spec: UploadSpec) -> Columns:
    """Parse a CSV or JSON file from disk (by suffix .json, else CSV), for the CLI."""
    with open(path, "rb") as fh:
        data = fh.read()
    media = "application/json" if path.lower().endswith(".json") else "text/csv"
    return read_upload(RawBody(data, media), spec)


def columns_from_dicts(rows: Sequence[Mapping[str, Any]], names: Sequence[str]) -> Columns:
    """Rows given as dicts (one JSON body of a single-row POST) as columns numbered from 1."""
    cols = {n: [_norm(r.get(n)) for r in rows] for n in names}
    # A key no row gives is an absent column, as in a CSV header without it.
    given = {n: col for n, col in cols.items() if any(v is not None for v in col)}
    return Columns(names, given, np.arange(1, len(rows) + 1, dtype=np.int64))


def _check_size(n: int) -> None:
    limit = get_settings().max_bulk_rows
    if n > limit:
        raise TooLarge(f"The upload has {n} rows; at most {limit} are accepted at once.")


def _norm(v: Any) -> Any:
    """A JSON cell: text stripped, blank text None; other values as given."""
    if isinstance(v, str):
        return v.strip() or None
    return v


def _check_header(names: Sequence[str], spec: UploadSpec) -> None:
    errors = RowErrors()
    for name in spec.required:
        if name not in names:
            errors.add(1, name, "required column is missing from the header")
    seen: set[str] = set()
    for name in names:
        if not name:
            errors.add(1, None, "a header cell is empty")
        elif name in seen:
            errors.add(1, name, "column named twice")
        elif name not in spec.columns:
            errors.add(1, name, f"unknown column; expected some of: {', '.join(spec.columns)}")
        seen.add(name)
    errors.raise_if_any("CSV header")


def _csv_columns(text: str, spec: UploadSpec, data: bytes | None = None) -> Columns:
    plain = _is_plain(text)
    reader: Any = None
    if plain:  # no quotes: the header is the first line, read without copying the text
        end = text.find("\n")
        first = text if end < 0 else text[:end]
        rows = csv.reader([first[:-1] if first.endswith("\r") else first])
    else:
        reader = rows = csv.reader(io.StringIO(text))
    try:
        names = [h.strip() for h in next(rows, [])]
    except csv.Error as exc:
        raise Invalid(f"The CSV header cannot be read: {exc}.") from None
    _check_header(names, spec)
    cols = _plain_columns(text, len(names), data) if plain else None
    if cols is None:
        if reader is None:
            reader = csv.reader(io.StringIO(text))
            next(reader)
        cols = _read_rows(reader, len(names))
    n = len(cols[0]) if cols else 0
    # Lines with only blank cells are skipped; their numbers still count.
    numbers = np.arange(2, n + 2, dtype=np.int64)
    cleaned = [_clean(col) for col in cols]
    if cleaned and not all(map(all, cleaned)):
        keep = np.zeros(n, dtype=bool)
        for col in cleaned:
            keep |= np.fromiter((v is not None for v in col), dtype=bool, count=n)
        if not keep.all():
            idx = np.nonzero(keep)[0]
            numbers = numbers[idx]
            cleaned = [[col[i] for i in idx.tolist()] for col in cleaned]
    _check_size(numbers.size)
    return Columns(names, dict(zip(names, cleaned, strict=True)), numbers)


def _is_plain(text: str) -> bool:
    """No quote characters and no carriage return outside a CRLF line end."""
    return '"' not in text and text.count("\r") == text.count("\r\n")


def _plain_columns(text: str, width: int, data: bytes | None = None) -> list[list[str]] | None:
    """The data rows' columns by pyarrow's CSV reader, for a plain file; None otherwise.

    Plain (_is_plain): no quote characters, no carriage return outside a CRLF line end, and
    every line as wide as the header. Such a file splits the same way in any CSV reader, so
    the fast reader and _read_rows agree; anything else (quoted cells, blank lines in a file
    of several columns, short or long rows) goes to _read_rows, which names every bad row.
    data: the upload's bytes (the text's UTF-8, maybe after a byte-order mark), read in
    place; without them the text is encoded once.
    """
    if not _is_plain(text):
        return None
    import pyarrow as pa
    import pyarrow.csv as pacsv

    end = text.find("\n")
    if end < 0 or not text[end + 1 :].strip():
        return None
    raw = memoryview(data if data is not None else text.encode())
    if raw[:3] == BOM:
        raw = raw[3:]
    names = [f"c{i}" for i in range(width)]
    try:
        table = pacsv.read_csv(
            pa.BufferReader(pa.py_buffer(raw)),
            read_options=pacsv.ReadOptions(column_names=names, skip_rows=1),
            parse_options=pacsv.ParseOptions(quote_char=False, ignore_empty_lines=False),
            convert_options=pacsv.ConvertOptions(
                column_types={n: pa.string() for n in names}, strings_can_be_null=False
            ),
        )
    except pa.ArrowInvalid:
        return None
    return [_shared_pylist(table.column(n)) for n in names]


def _shared_pylist(column: Any) -> list[str]:
    """A string column as a list; repeated cells share one str object.

    A million-row upload repeats its days, ids and hours: one object per distinct cell
    (8 bytes a cell for the list) instead of one per cell (about 60 bytes each).
    """
    arr = column.combine_chunks() if hasattr(column, "combine_chunks") else column
    encoded = arr.dictionary_encode()
    distinct = len(encoded.dictionary)
    if distinct > len(arr) // 2:
        return list(arr.to_pylist())
    values = np.array(encoded.dictionary.to_pylist(), dtype=object)
    return list(values[encoded.indices.to_numpy(zero_copy_only=False)].tolist())


def _read_rows(reader: Any, width: int) -> list[list[str]]:
    """The data rows' columns by the csv module; every short or long row is an error."""
    try:
        rows = list(reader)
    except csv.Error as exc:  # e.g. a bare carriage return inside an unquoted cell
        raise Invalid(
            f"The CSV upload cannot be read at line {reader.line_num}: {exc}.",
            errors=[{"row": reader.line_num, "field": None, "in": "body", "message": str(exc)}],
        ) from None
    # A line with no cells at all is blank: one empty cell per column, skipped later.
    rows = [r if r else [""] * width for r in rows]
    _check_size(sum(1 for r in rows if any(r)))
    lengths = np.fromiter(map(len, rows), dtype=np.int64, count=len(rows))
    errors = RowErrors()
    for i in np.nonzero(lengths != width)[0].tolist():
        if "".join(rows[i]).strip():  # a line of only blank cells is skipped, whatever its width
            errors.add(
                i + 2, None, f"the row has {lengths[i]} cells but the header has {width} columns"
            )
        else:
            rows[i] = [""] * width
    errors.raise_if_any("CSV upload")
    return [list(col) for col in zip(*rows, strict=True)] if rows else [[] for _ in range(width)]


def _clean(col: Sequence[str]) -> list[Any]:
    """CSV cells stripped, blank ones None (map and str methods run in C)."""
    stripped = list(map(str.strip, col))
    if all(stripped):
        return stripped
    return [c or None for c in stripped]


def _json_columns(text: str, spec: UploadSpec) -> Columns:
    try:
        items = json.loads(text)
    except ValueError as exc:
        raise Invalid(f"The JSON upload cannot be read: {exc}.") from None
    except RecursionError:  # arrays nested thousands deep
        raise Invalid("The JSON upload is nested too deeply to read.") from None
    if not isinstance(items, list):
        raise Invalid("The JSON upload must be a list of objects, one per row.")
    _check_size(len(items))
    errors = RowErrors()
    allowed = set(spec.columns)
    for i, item in enumerate(items, start=1):
        if not isinstance(item, dict):
            errors.add(i, None, "each row must be a JSON object")
            continue
        for key in item:
            if key not in allowed:
                errors.add(i, key, "unknown field")
    errors.raise_if_any("JSON upload")
    return columns_from_dicts(items, spec.columns)
