"""Small helpers every repository uses: fetch-or-404 and applying a partial update."""

from __future__ import annotations

from typing import Any, TypeVar

from pydantic import BaseModel
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
