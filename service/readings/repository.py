"""Query helpers for the readings numeric paths: epoch seconds in SQL, float matrices, keys.

Records and readings belong to a fixture or to an area; both are folded into one integer
key (fixture f -> 2f + 1, area a -> 2a), computed in SQL as coalesce(2 fixture + 1, 2 area).
Timestamps become epoch seconds in the database (PostgreSQL date_part('epoch'); SQLite
julianday), so rows come back as plain floats for numpy.
"""

from __future__ import annotations

from typing import Any

import numpy as np
from numpy.typing import NDArray
from sqlalchemy import ColumnElement, Float, cast, func
from sqlalchemy.orm import Session

FloatArray = NDArray[np.float64]
IntArray = NDArray[np.int64]
BoolArray = NDArray[np.bool_]


def target_keys(fixture_ids: IntArray, area_ids: IntArray, own: BoolArray) -> IntArray:
    """Record-target keys: a fixture's own records are odd keys, an area's even keys."""
    return np.where(own, 2 * fixture_ids + 1, 2 * area_ids).astype(np.int64)


def epoch(col: Any, dialect: str) -> ColumnElement[float]:
    """A timestamp column as epoch seconds (float) computed by the database."""
    if dialect == "postgresql":
        # date_part is float8 already; extract() gives numeric (PostgreSQL 14+), whose cast
        # back to float costs about as much as the rest of a large query. Same value: the
        # microseconds divided by 1e6, correctly rounded either way.
        return cast(func.date_part("epoch", col), Float)
    # SQLite keeps UTC text; julianday counts days from noon, 4714 BC.
    return (func.julianday(col) - 2440587.5) * 86400.0


def float_matrix(session: Session, stmt: Any, width: int) -> FloatArray:
    """Run a numeric query through Core and return its rows as a float matrix (NULL = NaN)."""
    result = session.connection().execute(stmt)
    # The driver's own tuples, not Row objects: every column here is a plain number (or
    # NULL, which numpy turns into NaN), so SQLAlchemy's per-row processing is skipped.
    try:
        rows = result.cursor.fetchall() if result.cursor is not None else []
    finally:
        result.close()
    if not rows:
        return np.zeros((0, width))
    return np.array(rows, dtype=np.float64).reshape(len(rows), width)
