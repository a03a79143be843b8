"""Bulk uploads and downloads over HTTP: the raw-body dependency and the download helpers.

Parsing, checking and writing an upload is the upload pipeline's (service.uploads:
parse, cells, write); a route takes the body with RawBodyDep and hands it to
service.uploads.parse.read_upload with its domain's UploadSpec.
"""

from __future__ import annotations

import csv
import io
import json
from collections.abc import Iterable, Mapping, Sequence
from dataclasses import dataclass
from typing import Annotated, Any

from fastapi import Depends, Request
from fastapi.responses import Response


@dataclass(frozen=True)
class RawBody:
    """An uploaded body and its media type (parameters such as charset are ignored)."""

    data: bytes
    media_type: str


def media_of(content_type: str) -> str:
    """The media type of a Content-Type header, lower case, without parameters."""
    return content_type.split(";")[0].strip().lower()


async def raw_body(request: Request) -> RawBody:
    """FastAPI dependency: the request body as bytes with its Content-Type."""
    return RawBody(await request.body(), media_of(request.headers.get("content-type", "")))


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


# For download routes: the media types their 200 answers really carry.
CSV_RESPONSES: dict[int | str, dict[str, Any]] = {
    200: {
        "description": "The rows as CSV (a header line, then one line per row).",
        "content": {"text/csv": {"schema": {"type": "string"}}},
    }
}
EXPORT_RESPONSES: dict[int | str, dict[str, Any]] = {
    200: {
        "description": "The rows as CSV (format=csv, the default) or a JSON list (format=json).",
        "content": {
            "text/csv": {"schema": {"type": "string"}},
            "application/json": {"schema": {"type": "array", "items": {"type": "object"}}},
        },
    }
}


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
