"""Helpers every repository uses: fetch-or-404, a partial update, list filters, uniqueness."""

from __future__ import annotations

from collections.abc import Sequence
from typing import Any, TypeVar

from pydantic import BaseModel
from sqlalchemy import Select, select
from sqlalchemy.orm import Session

from service.api.errors import NotFound
from service.api.ids import MAX_ID

M = TypeVar("M")


def get_or_404(session: Session, model: type[M], obj_id: int, label: str) -> M:
    """Load a row by primary key or raise NotFound naming what was missing."""
    # Ids outside the id columns' range exist nowhere (and SQLite cannot bind past 2**63 - 1).
    row = session.get(model, obj_id) if 1 <= obj_id <= MAX_ID else None
    if row is None:
        raise NotFound(f"{label} {obj_id} does not exist.", resource=label, id=obj_id)
    return row


def apply_patch(row: Any, patch: BaseModel) -> dict[str, Any]:
    """Copy the fields a client sent (exclude_unset) onto a row; returns what changed."""
    changes = patch.model_dump(exclude_unset=True)
    for field, value in changes.items():
        setattr(row, field, value)
    return changes


def filtered(
    stmt: Select[Any],
    *,
    equal: Sequence[tuple[Any, Any]] = (),
    contains: Sequence[tuple[Any, str | None]] = (),
    retired: tuple[Any, bool] | None = None,
) -> Select[Any]:
    """A list query narrowed by the filters a client gave (None: not given).

    `equal` pairs a column with the value it must equal, `contains` with a fragment its text
    must hold (any case); `retired` is (the retired-at column, include retired rows).
    """
    if retired is not None and not retired[1]:
        stmt = stmt.where(retired[0].is_(None))
    for column, value in equal:
        if value is not None:
            stmt = stmt.where(column == value)
    for column, fragment in contains:
        if fragment:
            stmt = stmt.where(column.ilike(f"%{fragment}%"))
    return stmt


def value_taken(
    session: Session, column: Any, value: Any, exclude_id: int | None = None, *within: Any
) -> bool:
    """True when a row other than `exclude_id` already has `value` in `column` (within scope)."""
    model = column.class_
    stmt = select(model.id).where(column == value, *within)
    if exclude_id is not None:
        stmt = stmt.where(model.id != exclude_id)
    return session.scalar(stmt) is not None
