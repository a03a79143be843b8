"""Checks every API request gets before its route: no unknown query parameters, no NUL,
no non-finite JSON numbers.

- A query parameter the route does not take is refused (422 naming it), as a body field
  is (extra="forbid"): a typo such as ?site=3 for ?site_id=3 would otherwise return the
  whole, unfiltered list.
- Text with a NUL character (U+0000) is refused (422 naming the field): PostgreSQL cannot
  store it in a text column and its driver fails (a 500), so the same request must fail
  the same way on SQLite too.
- A JSON number that is not a finite double (NaN, Infinity, 1e400) is refused (422 naming
  the field): JSON has no such numbers, but Python's parser, which FastAPI uses, reads
  them, and a schema field without allow_inf_nan=False would take them.
"""

from __future__ import annotations

import json
import math
import re
from collections.abc import Callable
from typing import Any

from fastapi import Request
from fastapi.dependencies.models import Dependant
from fastapi.routing import APIRoute

from service.api.errors import Invalid

Path = tuple[str, ...]
_ALLOWED: dict[int, frozenset[str]] = {}  # route id -> the query names it takes


def _query_names(dependant: Dependant) -> set[str]:
    """The query parameter names of a route and of every dependency it uses."""
    names = {p.alias for p in dependant.query_params}
    for sub in dependant.dependencies:
        names |= _query_names(sub)
    return names


def _allowed_query(route: APIRoute) -> frozenset[str]:
    names = _ALLOWED.get(id(route))
    if names is None:
        names = frozenset(_query_names(route.dependant))
        _ALLOWED[id(route)] = names
    return names


def _find(value: Any, bad: Callable[[Any], bool], path: Path = ()) -> Path | None:
    """Where in a parsed JSON document the first bad value (or key) lies, if anywhere."""
    if bad(value):
        return path
    if isinstance(value, dict):
        for key, item in value.items():
            if bad(key):
                return (*path, key)
            found = _find(item, bad, (*path, str(key)))
            if found is not None:
                return found
    if isinstance(value, list):
        for i, item in enumerate(value):
            found = _find(item, bad, (*path, str(i)))
            if found is not None:
                return found
    return None


def _item(doc: Any, path: Path, message: str) -> dict[str, Any]:
    item: dict[str, Any] = {"field": ".".join(path) or "body", "in": "body", "message": message}
    if isinstance(doc, list) and path:  # a bulk upload: rows are numbered from 1
        item["row"] = int(path[0]) + 1
    return item


def _has_nul(value: Any) -> bool:
    return isinstance(value, str) and "\x00" in value


def _nul_in_body(body: bytes) -> dict[str, Any] | None:
    """An error item for a body carrying a NUL character, else None."""
    if b"\x00" in body:  # raw byte: a CSV upload (JSON forbids raw control characters)
        line = body.count(b"\n", 0, body.index(b"\x00")) + 1
        return {"field": "body", "in": "body", "row": line, "message": "contains a NUL byte"}
    if b"\\u0000" not in body:  # the fast path for nearly every request
        return None
    try:
        doc = json.loads(body)
    except (ValueError, RecursionError):
        return None  # unreadable JSON: the route's own parser answers it
    path = _find(doc, _has_nul)
    if path is None:  # an escaped backslash followed by the text u0000
        return None
    return _item(doc, path, "contains a NUL character")


class _NonFinite:
    """Stands for NaN, Infinity or a number too large for a double while parsing."""


_NON_FINITE = _NonFinite()
# A cheap scan for text that may hold NaN, Infinity or an overflowing exponent (1e400).
_SUSPECT = re.compile(rb"NaN|Infinity|[eE]\+?\d{3,}")


def _float(text: str) -> Any:
    value = float(text)
    return value if math.isfinite(value) else _NON_FINITE


def _non_finite_in_json(body: bytes) -> dict[str, Any] | None:
    """An error item for a JSON number that is not a finite double, else None."""
    if not _SUSPECT.search(body):
        return None
    try:
        doc = json.loads(body, parse_constant=lambda _: _NON_FINITE, parse_float=_float)
    except (ValueError, RecursionError):
        return None  # unreadable JSON: the route's own parser answers it
    path = _find(doc, lambda v: v is _NON_FINITE)
    return None if path is None else _item(doc, path, "must be a finite number")


async def check_request(request: Request) -> None:
    """Refuse unknown query parameters, NUL characters and non-finite JSON numbers."""
    route = request.scope.get("route")
    if isinstance(route, APIRoute):
        allowed = _allowed_query(route)
        unknown = sorted({k for k in request.query_params if k not in allowed})
        if unknown:
            names = ", ".join(unknown)
            raise Invalid(
                f"Unknown query parameter(s): {names}. This route takes: "
                f"{', '.join(sorted(allowed)) or 'none'}.",
                errors=[
                    {"field": k, "in": "query", "message": "unknown query parameter"}
                    for k in unknown
                ],
            )
    for key, value in request.query_params.multi_items():
        if "\x00" in value or "\x00" in key:
            raise Invalid(
                f"The query parameter {key!r} contains a NUL character.",
                errors=[{"field": key, "in": "query", "message": "contains a NUL character"}],
            )
    if request.method not in ("POST", "PUT", "PATCH"):
        return
    body = await request.body()
    item = _nul_in_body(body)
    if item is not None:
        raise Invalid(f"The body field {item['field']} contains a NUL character.", errors=[item])
    if "json" in request.headers.get("content-type", ""):
        item = _non_finite_in_json(body)
        if item is not None:
            raise Invalid(f"The body field {item['field']} is not a finite number.", errors=[item])
