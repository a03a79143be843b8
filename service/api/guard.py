"""Checks every API request gets before its route: no unknown query parameters, no NUL.

- A query parameter the route does not take is refused (422 naming it), as a body field
  is (extra="forbid"): a typo such as ?site=3 for ?site_id=3 would otherwise return the
  whole, unfiltered list.
- Text with a NUL character (U+0000) is refused (422 naming the field): PostgreSQL cannot
  store it in a text column and its driver fails (a 500), so the same request must fail
  the same way on SQLite too.
"""

from __future__ import annotations

import json
from typing import Any

from fastapi import Request
from fastapi.dependencies.models import Dependant
from fastapi.routing import APIRoute

from service.api.errors import Invalid

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


def _nul_path(value: Any, path: tuple[str, ...] = ()) -> tuple[str, ...] | None:
    """Where in a parsed JSON document the first string with a NUL lies, if anywhere."""
    if isinstance(value, str):
        return path if "\x00" in value else None
    if isinstance(value, dict):
        for key, item in value.items():
            if "\x00" in key:
                return (*path, key)
            found = _nul_path(item, (*path, str(key)))
            if found is not None:
                return found
    if isinstance(value, list):
        for i, item in enumerate(value):
            found = _nul_path(item, (*path, str(i)))
            if found is not None:
                return found
    return None


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
    path = _nul_path(doc)
    if path is None:  # an escaped backslash followed by the text u0000
        return None
    item: dict[str, Any] = {
        "field": ".".join(path) or "body",
        "in": "body",
        "message": "contains a NUL character",
    }
    if isinstance(doc, list):  # a bulk upload: rows are numbered from 1
        item["row"] = int(path[0]) + 1
    return item


async def check_request(request: Request) -> None:
    """Refuse unknown query parameters and NUL characters before the route runs."""
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
    if request.method in ("POST", "PUT", "PATCH"):
        item = _nul_in_body(await request.body())
        if item is not None:
            raise Invalid(
                f"The body field {item['field']} contains a NUL character.", errors=[item]
            )
