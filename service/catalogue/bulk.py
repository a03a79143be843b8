"""Bulk import and export of lamp types (CSV or JSON): all rows or none."""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass
from typing import Any

from pydantic import ValidationError
from sqlalchemy import Table, bindparam, insert, update
from sqlalchemy.orm import Session

from service.api.bulk import Row, RowErrors, as_json_list
from service.api.errors import Invalid
from service.catalogue import repository as repo
from service.catalogue.models import LampType
from service.catalogue.schemas import LAMP_TYPE_FIELDS, LampTypeCreate, cross_check
from service.db.base import utcnow

ON_DUPLICATE = ("error", "update")
# Columns a CSV header must have (the others may be left out).
LAMP_TYPE_REQUIRED = ("code", "technology", "rated_watts", "rated_volts", "rated_life_h")
_JSON_FIELDS = ("mortality_points", "lumen_points", "extra")


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


def import_lamp_types(
    session: Session, rows: Sequence[Row], on_duplicate: str = "error"
) -> ImportResult:
    """Validate every row, then insert new codes and (on_duplicate='update') update others."""
    check_on_duplicate(on_duplicate)
    errors = RowErrors()
    existing = repo.ids_by_code(session)
    seen: dict[str, int] = {}
    new: list[dict[str, Any]] = []
    changed: list[dict[str, Any]] = []
    for row in rows:
        data = dict(row.data)
        bad = False
        for name in _JSON_FIELDS:
            if data.get(name) is not None:
                try:
                    data[name] = as_json_list(data[name])
                except ValueError as exc:
                    errors.add(row.number, name, str(exc))
                    bad = True
        if bad:
            continue
        try:
            body = LampTypeCreate.model_validate(data)
        except ValidationError as exc:
            errors.add_validation(exc, row.number)
            continue
        values = body.stored_values()
        problems = cross_check(values)
        for field, message in problems:
            errors.add(row.number, field, message)
        if problems:
            continue
        if body.code in seen:
            errors.add(row.number, "code", f"code also on row {seen[body.code]} of this file")
            continue
        seen[body.code] = row.number
        if body.code in existing:
            if on_duplicate == "error":
                errors.add(row.number, "code", "a lamp type with this code exists", conflict=True)
                continue
            changed.append({**values, "b_id": existing[body.code], "updated_at": utcnow()})
        else:
            new.append(values)
    errors.raise_if_any("lamp type import")
    if new:
        session.execute(insert(LampType), new)
    if changed:
        table: Table = LampType.__table__  # type: ignore[assignment]  # Core executemany
        stmt = update(table).where(table.c.id == bindparam("b_id"))
        session.connection().execute(stmt, changed)
    session.flush()
    session.expire_all()  # rows changed behind the ORM's back
    return ImportResult(rows=len(rows), created=len(new), updated=len(changed))


def export_lamp_types(
    session: Session,
    technology: str | None = None,
    code_contains: str | None = None,
    contains_mercury: bool | None = None,
) -> list[dict[str, Any]]:
    """Lamp types as dicts of every client-settable field, by code (import takes them back)."""
    stmt = repo.lamp_type_query(technology, code_contains, contains_mercury)
    stmt = stmt.with_only_columns(*(getattr(LampType, n) for n in LAMP_TYPE_FIELDS))
    return [dict(r._mapping) for r in session.execute(stmt.order_by(LampType.code))]
