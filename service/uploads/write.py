"""Step 3 of every upload: the one bulk writer, inside the caller's transaction.

write_rows(session, table, columns) inserts rows given as parallel columns:
- PostgreSQL (psycopg 3): COPY ... FROM STDIN through psycopg's row writer (write_row);
- SQLite: the sqlite3 driver's executemany over tuples, in chunks of `bulk_chunk_rows`
(the service runs on these two only).
Columns are Python sequences (passed through each column type's bind processor, memoised,
so values are stored exactly as an ORM insert stores them), numpy arrays (float NaN and a
negative int mean NULL: ids are positive) or Epoch (timestamps as epoch seconds, rendered
in one numpy call). Columns left out take their Python-side default, else the server's.
With return_ids=True the new primary keys come back in row order: on PostgreSQL taken from
the table's sequence first (nextval, safe with concurrent writers), on SQLite the first
row's rowid and the ones after it (the write lock is held from that first insert on).
Every cursor is closed; a driver error is raised as SQLAlchemy's (IntegrityError, ...) and
leaves the transaction to the caller's rollback.
"""

from __future__ import annotations

import json
from collections.abc import Callable, Iterator, Mapping, Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np
from numpy.typing import NDArray
from sqlalchemy import JSON, Column, Connection, Null, Table
from sqlalchemy.engine import Dialect
from sqlalchemy.exc import DBAPIError
from sqlalchemy.orm import Session

from service.config import get_settings


@dataclass(frozen=True)
class Epoch:
    """A timestamp column as epoch seconds (UTC); NaN is NULL."""

    seconds: NDArray[np.float64]

    def __len__(self) -> int:
        return int(self.seconds.size)


ColumnValues = Sequence[Any] | NDArray[Any] | Epoch


@dataclass(frozen=True)
class _Insert:
    """One bulk insert, as each driver's writer takes it."""

    table: Table
    names: list[str]  # the columns, in the order of each chunk's lists
    chunks: Iterator[list[list[Any]]]  # per chunk: one list of driver values per column
    n: int  # rows in all
    pk: str | None  # the primary key to number the rows by (return_ids), else None


def write_rows(
    session: Session,
    table: Table,
    columns: Mapping[str, ColumnValues],
    *,
    return_ids: bool = False,
) -> list[int]:
    """Insert the rows; returns their new ids in row order when return_ids, else []."""
    n = len(next(iter(columns.values()))) if columns else 0
    if n == 0:
        return []
    if any(len(col) != n for col in columns.values()):
        raise ValueError("every column must have one value per row")
    session.flush()  # pending ORM changes go first, in order
    conn = session.connection()
    dialect = conn.dialect
    # A callable default (a timestamp) is called once: every row of the upload gets the same.
    defaults = {c.name: _python_default(c) for c in _defaulted(table, columns)}
    names = [*columns, *defaults]
    pk = _pk_name(table) if return_ids else None
    # Driver values are made one chunk at a time, so a million rows never exist at once
    # as Python objects (the columns themselves stay numpy arrays or the caller's lists).
    chunks = (
        _chunk_values(table, columns, defaults, dialect, a, min(a + _chunk(), n))
        for a in range(0, n, _chunk())
    )
    job = _Insert(table, names, chunks, n, pk)
    dbapi: Any = dialect.loaded_dbapi
    try:
        if dialect.name == "postgresql" and dialect.driver == "psycopg":
            return _copy(conn, job)
        if dialect.name == "sqlite":
            return _sqlite(conn, job)
    except dbapi.Error as exc:
        # Raw driver errors as SQLAlchemy's (IntegrityError: 409 for a race between two
        # uploads; OperationalError: 503 when the database is busy), like any other query.
        raise DBAPIError.instance(
            f"bulk insert into {table.name}", None, exc, dbapi.Error, dialect=dialect
        ) from exc
    raise RuntimeError(
        f"bulk writes need PostgreSQL with psycopg 3 or SQLite, not {dialect.name}+{dialect.driver}"
    )


def _chunk() -> int:
    return get_settings().bulk_chunk_rows


def _defaulted(table: Table, columns: Mapping[str, ColumnValues]) -> list[Column[Any]]:
    """Columns left out that take a Python-side default (scalar or callable)."""
    return [
        col
        for col in table.columns
        if col.name not in columns and not col.primary_key and _python_default(col) is not None
    ]


def _chunk_values(
    table: Table,
    columns: Mapping[str, ColumnValues],
    defaults: Mapping[str, tuple[Any] | None],
    dialect: Dialect,
    a: int,
    b: int,
) -> list[list[Any]]:
    """Rows a..b-1 as one list of driver values per column (given, then defaulted)."""
    out = [_db_values(_slice(col, a, b), table.c[name], dialect) for name, col in columns.items()]
    for name, default in defaults.items():
        assert default is not None
        out.append(_db_values([default[0]] * (b - a), table.c[name], dialect))
    return out


def _slice(col: ColumnValues, a: int, b: int) -> ColumnValues:
    if isinstance(col, Epoch):
        return Epoch(col.seconds[a:b])
    return col[a:b]


def _pk_name(table: Table) -> str:
    (pk,) = table.primary_key.columns
    return str(pk.name)


def _python_default(col: Column[Any]) -> tuple[Any] | None:
    """(value,) of a column's scalar or callable Python default, or None."""
    d: Any = col.default
    if getattr(d, "is_scalar", False):
        return (d.arg,)
    if getattr(d, "is_callable", False):
        return (d.arg(None),)
    return None


def _db_values(col: ColumnValues, column: Column[Any], dialect: Dialect) -> list[Any]:
    """One column as a list of values the driver takes."""
    if isinstance(col, Epoch):
        return _epoch_text(col.seconds, dialect.name)
    if isinstance(col, np.ndarray):
        out: list[Any] = col.tolist()
        if col.dtype.kind == "f":
            for i in np.nonzero(np.isnan(col))[0].tolist():
                out[i] = None
        elif col.dtype.kind in "iu":
            for i in np.nonzero(col < 0)[0].tolist():
                out[i] = None
        return out
    if isinstance(column.type, JSON) and getattr(dialect, "_json_serializer", None) is None:
        return _json_texts(col, column.type)
    proc = column.type.dialect_impl(dialect).bind_processor(dialect)
    if proc is None:
        return list(col)
    return list(map(_memo(proc), col))


_INT = {int}


def _json_texts(col: Sequence[Any], type_: JSON) -> list[Any]:
    """A JSON column as its text, made as the JSON type's bind processor makes it.

    json.dumps, which the processor calls on SQLite and psycopg's Json dumper calls on
    PostgreSQL (the engine sets no serializer of its own); None is JSON null unless the
    type stores it as SQL NULL, and a SQL null() stays NULL. Straight to text: no wrapper
    object per value and no failed look-up in the memo (lists cannot be hashed), which cost
    a weekly run's 44,000 order lines several times the encoding itself.
    """
    out: list[Any] = []
    for v in col:
        if v is None:
            out.append(None if type_.none_as_null else "null")
        elif v is JSON.NULL:
            out.append("null")
        elif isinstance(v, Null):
            out.append(None)
        elif type(v) is list and set(map(type, v)) <= _INT:  # ids, numbers (not bools)
            out.append(str(v))  # a list of ints prints as json.dumps writes it, 4x quicker
        else:
            out.append(json.dumps(v))
    return out


def _epoch_text(seconds: NDArray[np.float64], dialect_name: str) -> list[Any]:
    """Epoch seconds as timestamp text: with +00 for PostgreSQL; SQLite as SQLAlchemy stores it.

    Each distinct value is rendered once (uploads repeat days and times over many rows).
    """
    blank = np.isnan(seconds)
    us = np.round(np.where(blank, 0.0, seconds) * 1e6).astype(np.int64)
    uniq, inverse = np.unique(us, return_inverse=True)
    text = np.datetime_as_string(uniq.astype("datetime64[us]"), unit="us").tolist()
    if dialect_name == "postgresql":
        rendered = [t + "+00" for t in text]
    else:  # SQLAlchemy's SQLite DATETIME storage format: "YYYY-MM-DD HH:MM:SS.ffffff"
        rendered = [t.replace("T", " ") for t in text]
    out: list[Any] = np.array(rendered, dtype=object)[inverse.ravel()].tolist()
    for i in np.nonzero(blank)[0].tolist():
        out[i] = None
    return out


def _memo(proc: Callable[[Any], Any]) -> Callable[[Any], Any]:
    """A bind processor that remembers its answers (many rows share one timestamp)."""
    seen: dict[Any, Any] = {}

    def run(v: Any) -> Any:
        try:
            return seen[v]
        except KeyError:
            seen[v] = out = proc(v)
            return out
        except TypeError:  # unhashable (JSON lists)
            return proc(v)

    return run


def _quoted(names: Sequence[str]) -> str:
    return ", ".join(f'"{c}"' for c in names)


def _copy(conn: Connection, job: _Insert) -> list[int]:
    raw: Any = conn.connection.driver_connection
    ids: list[int] = []
    table, pk, names = job.table, job.pk, job.names
    with raw.cursor() as cur:
        if pk is not None:
            cur.execute(
                "SELECT nextval(pg_get_serial_sequence(%s, %s)) FROM generate_series(1, %s)",
                (f'"{table.name}"', pk, job.n),
            )
            ids = [int(r[0]) for r in cur.fetchall()]
            names = [pk, *names]
        with cur.copy(f'COPY "{table.name}" ({_quoted(names)}) FROM STDIN') as cp:
            at = 0
            for lists in job.chunks:
                if pk is not None:
                    lists = [ids[at : at + len(lists[0])], *lists]
                at += len(lists[0])
                for row in zip(*lists, strict=True):
                    cp.write_row(row)
    return ids


def _insert_sql(table: Table, names: Sequence[str]) -> str:
    """The sqlite3 INSERT of one row into these columns, with qmark parameters."""
    return f'INSERT INTO "{table.name}" ({_quoted(names)}) VALUES ({", ".join("?" * len(names))})'


def _sqlite(conn: Connection, job: _Insert) -> list[int]:
    raw: Any = conn.connection.driver_connection
    cur = raw.cursor()
    try:
        if job.pk is None:
            sql = _insert_sql(job.table, job.names)
            for lists in job.chunks:
                cur.executemany(sql, zip(*lists, strict=True))
            return []
        # The first row gets the next rowid (max + 1) and takes the write lock; the rest
        # follow it with explicit ids, so the ids are known without reading anything back.
        sql = _insert_sql(job.table, [job.pk, *job.names])
        first: int | None = None
        next_id = 0
        for lists in job.chunks:
            rows = zip(*lists, strict=True)
            m = len(lists[0])
            if first is None:
                cur.execute(sql, (None, *next(rows)))
                first = int(cur.lastrowid)
                next_id, m = first + 1, m - 1
            cur.executemany(sql, ((next_id + k, *row) for k, row in enumerate(rows)))
            next_id += m
        assert first is not None
        return list(range(first, first + job.n))
    finally:
        cur.close()
