"""Query helpers for the readings numeric paths: epoch seconds in SQL, float matrices, keys.

Records and readings belong to a fixture or to an area; both are folded into one integer
key (fixture f -> 2f + 1, area a -> 2a), computed in SQL as coalesce(2 fixture + 1, 2 area).
Timestamps become epoch seconds in the database (PostgreSQL date_part('epoch'); SQLite
julianday), so rows come back as plain floats for numpy.

On PostgreSQL a float matrix comes back as one row: each column aggregated by the server
into one bytea of big-endian float8 (string_agg(float8send(coalesce(x, 'NaN')))), read in
binary and turned into an array by np.frombuffer, instead of a Python tuple per row and
np.array over them (about 1.6x quicker at 100,000 rows x 11 columns, measured side by
side in benchmarks/bench_forecast.py). The aggregates of one query level read the same
input rows in the same order, so the columns stay aligned; row order is whatever the
plan gives, as for the generic path (callers sort).
"""

from __future__ import annotations

from collections.abc import Iterator
from contextlib import contextmanager
from typing import Any

import numpy as np
from numpy.typing import NDArray
from sqlalchemy import ColumnElement, Connection, Float, cast, func, literal_column, select
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
    """Run a numeric query and return its rows as a float matrix (NULL = NaN)."""
    conn = session.connection()
    if conn.dialect.name == "postgresql":
        return _pg_float_matrix(conn, stmt, width)
    return rows_matrix(session, stmt, width)


def rows_matrix(session: Session, stmt: Any, width: int) -> FloatArray:
    """The generic path: the driver's rows through numpy (any database)."""
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


def _pg_float_matrix(conn: Connection, stmt: Any, width: int) -> FloatArray:
    """PostgreSQL: every column as one bytea of big-endian float8, read in binary."""
    q = stmt.subquery()
    nan: Any = literal_column("'NaN'::float8")
    empty: Any = literal_column("''::bytea")
    agg = select(
        *(func.string_agg(func.float8send(func.coalesce(cast(c, Float), nan)), empty) for c in q.c)
    )
    with _binary_results(conn):
        result = conn.execute(agg)
    try:
        row = result.cursor.fetchone() if result.cursor is not None else None
    finally:
        result.close()
    if row is None or row[0] is None:  # no rows: every aggregate is NULL
        return np.zeros((0, width))
    out = np.empty((len(row[0]) // 8, width))
    for j, col in enumerate(row):
        out[:, j] = np.frombuffer(col, dtype=">f8")
    return out


@contextmanager
def _binary_results(conn: Connection) -> Iterator[None]:
    """Cursors made on this connection meanwhile ask for binary results (psycopg 3)."""
    import psycopg  # the PostgreSQL driver: imported only when it is the database

    class BinaryCursor(psycopg.Cursor[Any]):
        def __init__(self, *args: Any, **kwargs: Any) -> None:
            super().__init__(*args, **kwargs)
            self.format = psycopg.pq.Format.BINARY

    raw: Any = conn.connection.driver_connection
    before = raw.cursor_factory
    raw.cursor_factory = BinaryCursor
    try:
        yield
    finally:
        raw.cursor_factory = before
