"""Record ids in paths, query strings and bodies: whole numbers from 1 to MAX_ID.

A bound at the schema answers an impossible id (0, -1, 2**63, 10**30) with a 422 naming the
field, instead of letting the database driver fail on it (SQLite cannot bind an integer past
2**63 - 1; PostgreSQL refuses one past 2**31 - 1 in an INTEGER column).
"""

from __future__ import annotations

from typing import Annotated

from fastapi import Path, Query
from pydantic import Field

from service.db.ids import MAX_ID  # re-exported: the id columns' range is the database's fact

__all__ = ["MAX_ID", "Id", "IdPath", "IdQuery"]

# In a request body (pydantic models). Strict: true, 2.0 or "2" is not an id (lax
# validation would read true as record 1).
Id = Annotated[int, Field(strict=True, ge=1, le=MAX_ID, description="A record id.")]
# In a URL path.
IdPath = Annotated[int, Path(ge=1, le=MAX_ID, description="A record id.")]
# As an optional query filter.
IdQuery = Annotated[int | None, Query(ge=1, le=MAX_ID, description="Only records with this id.")]
