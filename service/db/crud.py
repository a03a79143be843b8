"""Helpers every repository uses: fetch-or-404, a partial update, list filters, uniqueness."""

from __future__ import annotations

from collections.abc import Iterable, Mapping
from dataclasses import dataclass, field
from typing import Any, TypeVar

from pydantic import BaseModel
from sqlalchemy import ColumnElement, Select, bindparam, select
from sqlalchemy.orm import Session

from service.db.ids import MAX_ID
from service.errors import NotFound

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
    for name, value in changes.items():
        setattr(row, name, value)
    return changes


def sort_columns(model: type[Any], *names: str) -> dict[str, Any]:
    """A list's sort whitelist: each name is the model column of that name."""
    return {name: getattr(model, name) for name in names}


@dataclass(frozen=True)
class ListQuery:
    """A list's filters, declared once: called with the filters a client gave, by name.

    `equal` names filters that must equal the column of the same name; `contains` maps a
    filter to the text column it must be found in (any case); `retired` adds the
    include_retired filter on retired_at. A filter left at None (or an empty string) is
    not applied; `options` are loader options of the statement.
    """

    model: type[Any]
    equal: tuple[str, ...] = ()
    contains: Mapping[str, str] = field(default_factory=dict)
    retired: bool = False
    options: tuple[Any, ...] = ()

    def _check(self, given: Mapping[str, Any]) -> None:
        known = {*self.equal, *self.contains, *(["include_retired"] if self.retired else [])}
        unknown = set(given) - known
        if unknown:
            raise TypeError(f"unknown filters {sorted(unknown)} for {self.model.__name__}")

    def __call__(self, **given: Any) -> Select[Any]:
        self._check(given)
        stmt = select(self.model).options(*self.options)
        if self.retired and not given.get("include_retired", True):
            stmt = stmt.where(self.model.retired_at.is_(None))
        for name in self.equal:
            value = given.get(name)
            if value is not None and value != "":
                stmt = stmt.where(getattr(self.model, name) == value)
        for name, column in self.contains.items():
            fragment = given.get(name)
            if fragment:
                stmt = stmt.where(getattr(self.model, column).ilike(f"%{fragment}%"))
        return stmt

    def binds(self, **given: Any) -> dict[str, Any]:
        """The filters that apply, as bind values by name (what `__call__` would filter on).

        A `contains` filter binds its LIKE pattern; include_retired=False binds "active",
        which has no value. With `bound_where`, a statement built once serves every request.
        """
        self._check(given)
        found = {n: given[n] for n in self.equal if given.get(n) is not None and given[n] != ""}
        found.update({n: f"%{given[n]}%" for n in self.contains if given.get(n)})
        if self.retired and not given.get("include_retired", True):
            found["active"] = None
        return found

    def bound_where(self, names: Iterable[str]) -> list[ColumnElement[bool]]:
        """The conditions of filters named by `binds`, each on a bind parameter of its name."""
        where: list[ColumnElement[bool]] = []
        for name in names:
            if name == "active":
                where.append(self.model.retired_at.is_(None))
            elif name in self.contains:
                where.append(getattr(self.model, self.contains[name]).ilike(bindparam(name)))
            else:
                where.append(getattr(self.model, name) == bindparam(name))
        return where


def value_taken(
    session: Session, column: Any, value: Any, exclude_id: int | None = None, *within: Any
) -> bool:
    """True when a row other than `exclude_id` already has `value` in `column` (within scope)."""
    model = column.class_
    stmt = select(model.id).where(column == value, *within)
    if exclude_id is not None:
        stmt = stmt.where(model.id != exclude_id)
    return session.scalar(stmt) is not None
