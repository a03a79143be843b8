"""Bulk import and export of lamp types (CSV or JSON): all rows or none."""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np
from pydantic import ValidationError
from sqlalchemy import Table, bindparam, update
from sqlalchemy.orm import Session

from service.api.errors import Invalid
from service.catalogue import repository as repo
from service.catalogue.models import LampType
from service.catalogue.schemas import LAMP_TYPE_FIELDS, LampTypeCreate, cross_check
from service.db.base import utcnow
from service.uploads import cells
from service.uploads.errors import RowErrors
from service.uploads.parse import Columns, UploadSpec
from service.uploads.write import write_rows

ON_DUPLICATE = ("error", "update")
# Columns a CSV header must have (the others may be left out).
LAMP_TYPE_REQUIRED = ("code", "technology", "rated_watts", "rated_volts", "rated_life_h")
LAMP_TYPE_UPLOAD = UploadSpec(columns=LAMP_TYPE_FIELDS, required=LAMP_TYPE_REQUIRED)
_JSON_FIELDS = ("mortality_points", "lumen_points", "lm80_points", "extra")
# Number and true/false fields, read by the upload pipeline's cell readers (one wording for
# every upload) before the schema checks ranges and the rules across fields.
_NUMBER_FIELDS = tuple(
    n for n, f in LampTypeCreate.model_fields.items() if f.annotation in (float, float | None)
)
_BOOL_FIELDS = tuple(
    n for n, f in LampTypeCreate.model_fields.items() if f.annotation in (bool, bool | None)
)


@dataclass(frozen=True)
class ImportResult:
    """What an import did."""

    rows: int
    created: int
    updated: int


def check_on_duplicate(on_duplicate: str) -> None:
    """422 unless on_duplicate is 'error' or 'update'."""
    if on_duplicate not in ON_DUPLICATE:
        raise Invalid(
            f"on_duplicate must be one of {', '.join(ON_DUPLICATE)}.",
            errors=[{"field": "on_duplicate", "in": "query", "message": "error or update"}],
        )


def _typed_rows(c: Columns, errors: RowErrors) -> list[dict[str, Any] | None]:
    """Each row's given cells with numbers, booleans and JSON lists read; None if one is bad."""
    typed: dict[str, list[Any]] = {}
    for name in _NUMBER_FIELDS:
        x = cells.floats(c, name, errors)
        typed[name] = [None if np.isnan(v) else v for v in x.tolist()]
    for name in _BOOL_FIELDS:
        typed[name] = cells.optional_bools(c, name, errors)
    for name in _JSON_FIELDS:
        typed[name] = cells.json_values(c, name, errors, "[[0, 1.0], [5000, 0.9]]")
    out: list[dict[str, Any] | None] = []
    for i, number in enumerate(c.numbers.tolist()):
        if number in errors.bad_rows:
            out.append(None)
            continue
        row = c.row(i)
        for name, col in typed.items():
            row.pop(name, None)
            if col[i] is not None:
                row[name] = col[i]
        out.append(row)
    return out


def import_lamp_types(session: Session, c: Columns, on_duplicate: str = "error") -> ImportResult:
    """Validate every row, then insert new codes and (on_duplicate='update') update others."""
    check_on_duplicate(on_duplicate)
    errors = RowErrors()
    existing = repo.ids_by_code(session)
    seen: dict[str, int] = {}
    new: list[dict[str, Any]] = []
    changed: list[dict[str, Any]] = []
    for number, data in zip(c.numbers.tolist(), _typed_rows(c, errors), strict=True):
        if data is None:
            continue
        try:
            body = LampTypeCreate.model_validate(data)
        except ValidationError as exc:
            errors.add_validation(exc, number)
            continue
        values = body.stored_values()
        problems = cross_check(values)
        for field, message in problems:
            errors.add(number, field, message)
        if problems:
            continue
        if body.code in seen:
            errors.add(number, "code", f"code also on row {seen[body.code]} of this file")
            continue
        seen[body.code] = number
        if body.code in existing:
            if on_duplicate == "error":
                errors.add(number, "code", "a lamp type with this code exists", conflict=True)
                continue
            changed.append({**values, "b_id": existing[body.code], "updated_at": utcnow()})
        else:
            new.append(values)
    errors.raise_if_any("lamp type import")
    table: Table = LampType.__table__  # type: ignore[assignment]
    if new:
        write_rows(session, table, {k: [v[k] for v in new] for k in new[0]})
    if changed:
        stmt = update(table).where(table.c.id == bindparam("b_id"))
        session.connection().execute(stmt, changed)
    session.flush()
    session.expire_all()  # rows changed behind the ORM's back
    return ImportResult(rows=len(c), created=len(new), updated=len(changed))


def export_lamp_types(
    session: Session,
    technology: str | None = None,
    code_contains: str | None = None,
    contains_mercury: bool | None = None,
) -> list[dict[str, Any]]:
    """Lamp types as dicts of every client-settable field, by code (import takes them back)."""
    stmt = repo.lamp_type_query(
        technology=technology, code=code_contains, contains_mercury=contains_mercury
    )
    stmt = stmt.with_only_columns(*(getattr(LampType, n) for n in LAMP_TYPE_FIELDS))
    return [dict(r._mapping) for r in session.execute(stmt.order_by(LampType.code))]
