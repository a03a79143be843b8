"""Writing validated readings in bulk: COPY on PostgreSQL, Core executemany elsewhere."""

from __future__ import annotations

import io
import math
from collections.abc import Sequence
from datetime import UTC, datetime
from typing import Any

import numpy as np
from sqlalchemy import Table, insert
from sqlalchemy.orm import Session

CHUNK = 20_000  # rows per executemany round trip


def epoch_to_dt(values: np.ndarray) -> list[datetime]:
    """Epoch seconds to aware UTC datetimes."""
    return [datetime.fromtimestamp(float(v), UTC) for v in values]


def _escape(text: str) -> str:
    return text.replace("\\", "\\\\").replace("\t", "\\t").replace("\n", "\\n").replace("\r", "\\r")


def _copy_text(columns: Sequence[np.ndarray | list[Any]], kinds: Sequence[str]) -> str:
    """COPY text format: tab separated, \\N for NULL; kinds: int, float, ts, bool, word, str."""
    rendered: list[list[str]] = []
    for col, kind in zip(columns, kinds, strict=True):
        if kind == "ts":
            arr = np.asarray(col, dtype=np.float64)
            us = np.round(arr * 1e6).astype("datetime64[us]")
            text = np.datetime_as_string(us, unit="us").tolist()
            rendered.append([t + "+00" for t in text])
        elif kind == "float":
            rendered.append(
                ["\\N" if math.isnan(v) else repr(v) for v in np.asarray(col, np.float64).tolist()]
            )
        elif kind == "int":
            rendered.append(["\\N" if v < 0 else str(v) for v in np.asarray(col).tolist()])
        elif kind == "bool":
            rendered.append(["t" if v else "f" for v in np.asarray(col).tolist()])
        elif kind == "word":  # known safe words (no tabs, newlines or backslashes)
            rendered.append([str(v) for v in col])
        else:
            rendered.append(["\\N" if v is None else _escape(str(v)) for v in col])
    buf = io.StringIO()
    for row in zip(*rendered, strict=True):
        buf.write("\t".join(row))
        buf.write("\n")
    return buf.getvalue()


def bulk_insert(
    session: Session,
    table: Table,
    names: Sequence[str],
    columns: Sequence[np.ndarray | list[Any]],
    kinds: Sequence[str],
) -> int:
    """Insert rows given as parallel columns (ints < 0 and float NaN mean NULL)."""
    n = len(columns[0]) if columns else 0
    if n == 0:
        return 0
    conn = session.connection()
    if conn.dialect.name == "postgresql":
        raw: Any = conn.connection.dbapi_connection
        text = _copy_text(columns, kinds)
        with raw.cursor().copy(f"COPY {table.name} ({', '.join(names)}) FROM STDIN") as cp:
            cp.write(text)
        return n
    py: list[list[Any]] = []
    for col, kind in zip(columns, kinds, strict=True):
        if kind == "ts":
            py.append(epoch_to_dt(np.asarray(col)))
        elif kind == "float":
            py.append([None if math.isnan(v) else v for v in np.asarray(col, np.float64).tolist()])
        elif kind == "int":
            py.append([None if v < 0 else v for v in np.asarray(col).tolist()])
        elif kind == "bool":
            py.append([bool(v) for v in np.asarray(col).tolist()])
        else:
            py.append(list(col))
    rows = [dict(zip(names, vals, strict=True)) for vals in zip(*py, strict=True)]
    for i in range(0, n, CHUNK):
        session.execute(insert(table), rows[i : i + CHUNK])
    return n
