"""Bulk uploads and downloads shared by every domain: CSV or JSON rows in, row errors out.

Row numbers are as a person counts them in the file: in CSV the header is line 1 and the
first data row is 2 (a spreadsheet's row number); in JSON the first list item is 1.
An upload is all rows or none: collect every bad row in a RowErrors, then raise once.
"""

from __future__ import annotations

import csv
import io
import json
from collections.abc import Collection, Iterable, Mapping, Sequence
from dataclasses import dataclass
from typing import Annotated, Any

from fastapi import Depends, Request
from fastapi.responses import Response
from pydantic import ValidationError

from service.api.errors import Conflict, DomainError, Invalid, TooLarge
from service.config import get_settings

MAX_ROW_ERRORS = 1000  # errors listed in one answer; the count says how many there were

CSV_TYPES = ("text/csv", "application/csv", "text/plain")
JSON_TYPES = ("application/json",)


class UnsupportedMediaType(DomainError):
    """The upload is neither CSV nor JSON (415)."""

    status, title, kind = 415, "Unsupported media type", "unsupported-media-type"


@dataclass(frozen=True)
class RawBody:
    """An uploaded body and its media type (without parameters such as charset)."""

    data: bytes
    media_type: str


async def raw_body(request: Request) -> RawBody:
    """FastAPI dependency: the request body as bytes with its Content-Type."""
    media = request.headers.get("content-type", "").split(";")[0].strip().lower()
    return RawBody(await request.body(), media)


RawBodyDep = Annotated[RawBody, Depends(raw_body)]

# For routes taking a RawBodyDep: shows both upload forms in /docs.
UPLOAD_OPENAPI: dict[str, Any] = {
    "requestBody": {
        "required": True,
        "content": {
            "text/csv": {"schema": {"type": "string"}},
            "application/json": {"schema": {"type": "array", "items": {"type": "object"}}},
        },
    }
}


@dataclass(frozen=True)
class Row:
    """One uploaded row: its number in the file and its cells by column name."""

    number: int
    data: dict[str, Any]


class RowErrors:
    """Collects errors per row; raise_if_any() raises one problem listing them all."""

    def __init__(self, cap: int = MAX_ROW_ERRORS) -> None:
        self.cap = cap
        self.items: list[dict[str, Any]] = []
        self.count = 0
        self.bad_rows: set[int] = set()
        self._conflicts = 0

    def add(self, row: int, field: str | None, message: str, *, conflict: bool = False) -> None:
        """Record that a row's field is bad (conflict=True: clashes with stored data)."""
        self.count += 1
        self.bad_rows.add(row)
        if conflict:
            self._conflicts += 1
        if len(self.items) < self.cap:
            self.items.append({"row": row, "field": field, "message": message})

    def add_validation(self, exc: ValidationError, row: int, prefix: str | None = None) -> None:
        """Record every error of a pydantic ValidationError raised for one row."""
        for err in exc.errors():
            loc = [str(p) for p in err.get("loc", ())]
            field = ".".join(loc) if loc else prefix
            self.add(row, field, str(err.get("msg", "invalid")))

    def __bool__(self) -> bool:
        return self.count > 0

    def __len__(self) -> int:
        return self.count

    def raise_if_any(self, what: str = "upload") -> None:
        """Raise Invalid (422), or Conflict (409) when every error is a clash; nothing saved."""
        if not self.count:
            return
        self.items.sort(key=lambda e: (e["row"], str(e["field"])))
        rows = len(self.bad_rows)
        detail = f"The {what} has {self.count} error(s) in {rows} row(s); nothing was saved." + (
            f" The first {self.cap} are listed." if self.count > self.cap else ""
        )
        cls = Conflict if self._conflicts == self.count else Invalid
        raise cls(detail, errors=self.items, error_count=self.count, bad_rows=rows)


def _check_size(n: int) -> None:
    limit = get_settings().max_bulk_rows
    if n > limit:
        raise TooLarge(f"The upload has {n} rows; at most {limit} are accepted at once.")


def parse_csv(
    text: str, columns: Collection[str] | None = None, required: Collection[str] = ()
) -> list[Row]:
    """CSV text (header first) into rows; cells stripped, empty cells become None.

    columns: the allowed header names (None: any); required: names the header must have.
    """
    reader = csv.reader(io.StringIO(text))
    try:
        header = next(reader)
    except StopIteration:
        raise Invalid(
            "The CSV upload is empty: give a header line and rows.",
            errors=[{"row": 1, "field": None, "message": "no header line"}],
        ) from None
    except csv.Error as exc:
        raise Invalid(f"The CSV header cannot be read: {exc}.") from None
    names = [h.strip().lstrip("\ufeff") for h in header]
    _check_header(names, columns, required)
    width = len(names)
    rows: list[Row] = []
    errors = RowErrors()
    number = 1
    try:
        for cells in reader:
            number += 1
            if not cells or not "".join(cells).strip():
                continue  # blank line
            if len(cells) > width:
                errors.add(number, None, f"{len(cells)} cells but the header has {width} columns")
                continue
            values = [c.strip() or None for c in cells]
            rows.append(Row(number, dict(zip(names, values, strict=False))))  # short: None
    except csv.Error as exc:
        errors.add(number, None, f"cannot read the line: {exc}")
    errors.raise_if_any("CSV upload")
    _check_size(len(rows))
    return rows


def _check_header(
    names: Sequence[str], columns: Collection[str] | None, required: Collection[str]
) -> None:
    errors = RowErrors()
    for name in required:
        if name not in names:
            errors.add(1, name, "required column is missing from the header")
    seen: set[str] = set()
    for name in names:
        if not name:
            errors.add(1, None, "a header cell is empty")
        elif name in seen:
            errors.add(1, name, "column named twice")
        elif columns is not None and name not in columns:
            errors.add(1, name, f"unknown column; expected some of: {', '.join(columns)}")
        seen.add(name)
    errors.raise_if_any("CSV header")


def parse_json(data: bytes | str, columns: Collection[str] | None = None) -> list[Row]:
    """A JSON list of objects into rows numbered from 1."""
    try:
        items = json.loads(data)
    except (ValueError, UnicodeDecodeError) as exc:
        raise Invalid(f"The JSON upload cannot be read: {exc}.") from None
    except RecursionError:  # arrays nested thousands deep
        raise Invalid("The JSON upload is nested too deeply to read.") from None
    if not isinstance(items, list):
        raise Invalid("The JSON upload must be a list of objects, one per row.")
    _check_size(len(items))
    rows: list[Row] = []
    errors = RowErrors()
    allowed = None if columns is None else set(columns)
    for i, item in enumerate(items, start=1):
        if not isinstance(item, dict):
            errors.add(i, None, "each row must be a JSON object")
            continue
        if allowed is not None:
            for key in item:
                if key not in allowed:
                    errors.add(i, key, "unknown field")
        rows.append(Row(i, item))
    errors.raise_if_any("JSON upload")
    return rows


def parse_rows(
    body: RawBody, columns: Collection[str] | None = None, required: Collection[str] = ()
) -> list[Row]:
    """Parse an upload by its media type: text/csv or application/json (415 otherwise)."""
    media = body.media_type.split(";")[0].strip().lower()
    if media in JSON_TYPES or media.endswith("+json"):
        return parse_json(body.data, columns)
    if media in CSV_TYPES:
        try:
            text = body.data.decode("utf-8-sig")
        except UnicodeDecodeError as exc:
            raise Invalid(f"The CSV upload must be UTF-8 text: {exc}.") from None
        return parse_csv(text, columns, required)
    raise UnsupportedMediaType(
        f"Send the rows as text/csv or application/json, not '{media or 'nothing'}'."
    )


def read_file(
    path: str, columns: Collection[str] | None = None, required: Collection[str] = ()
) -> list[Row]:
    """Parse a CSV or JSON file from disk (by suffix .json, else CSV) for the CLI."""
    with open(path, "rb") as fh:
        data = fh.read()
    media = "application/json" if path.lower().endswith(".json") else "text/csv"
    return parse_rows(RawBody(data, media), columns, required)


def _cell(v: Any) -> Any:
    if v is None:
        return ""
    if isinstance(v, bool):
        return "true" if v else "false"
    if isinstance(v, (list, dict)):
        return json.dumps(v, separators=(",", ":"))
    if hasattr(v, "isoformat"):
        return v.isoformat()
    return v


def to_csv(columns: Sequence[str], rows: Iterable[Mapping[str, Any]]) -> str:
    """Rows as CSV text with a header; lists/objects as JSON, None as an empty cell."""
    out = io.StringIO()
    w = csv.writer(out, lineterminator="\n")
    w.writerow(columns)
    for r in rows:
        w.writerow([_cell(r.get(c)) for c in columns])
    return out.getvalue()


def _json_value(v: Any) -> Any:
    return v.isoformat() if hasattr(v, "isoformat") else v


def to_json(columns: Sequence[str], rows: Iterable[Mapping[str, Any]]) -> str:
    """Rows as a JSON list of objects with the given keys (dates ISO 8601)."""
    return json.dumps([{c: _json_value(r.get(c)) for c in columns} for r in rows])


def export_response(
    columns: Sequence[str], rows: Iterable[Mapping[str, Any]], fmt: str, filename: str
) -> Response:
    """An attachment download of rows as CSV or JSON."""
    if fmt == "json":
        body, media = to_json(columns, rows), "application/json"
    else:
        body, media = to_csv(columns, rows), "text/csv; charset=utf-8"
    ext = "json" if fmt == "json" else "csv"
    return Response(
        body,
        media_type=media,
        headers={"Content-Disposition": f'attachment; filename="{filename}.{ext}"'},
    )


# Parsing cells that may come as CSV text or JSON values ------------------------------


def as_bool(v: Any) -> bool:
    """true/false, yes/no, 1/0 (any case) or a JSON boolean; ValueError otherwise."""
    if isinstance(v, bool):
        return v
    s = str(v).strip().lower()
    if s in ("true", "yes", "y", "1", "t"):
        return True
    if s in ("false", "no", "n", "0", "f"):
        return False
    raise ValueError("must be true or false")


def as_json_list(v: Any) -> Any:
    """A JSON list given inline (CSV cell text) or as a JSON value."""
    if isinstance(v, str):
        try:
            return json.loads(v)
        except ValueError:
            raise ValueError("must be a JSON list, e.g. [[0, 1.0], [5000, 0.9]]") from None
    return v
