"""The anchor of the bulk benchmarks: the same rows written raw into the same tables.

`snapshot` reads what an import stored (every column, the driver's own values), `clear`
deletes it again, and `raw_insert` writes the snapshot back in one transaction the plainest
way each database has: COPY ... FROM STDIN with psycopg's write_row on PostgreSQL,
executemany over tuples on SQLite. No parsing, no checks, no lookups: the floor an upload
path can approach.
"""

from __future__ import annotations

import time
from typing import Any

from sqlalchemy import create_engine

Snapshot = dict[str, tuple[list[str], list[tuple[Any, ...]]]]


def _raw(url: str) -> Any:
    engine = create_engine(url)
    return engine, engine.raw_connection()


def snapshot(url: str, tables: list[str]) -> Snapshot:
    """Every row of the tables (parents first), with column names."""
    engine, conn = _raw(url)
    out: Snapshot = {}
    try:
        cur = conn.cursor()
        for t in tables:
            cur.execute(f'SELECT * FROM "{t}" ORDER BY 1')
            cols = [d[0] for d in cur.description]
            out[t] = (cols, [tuple(r) for r in cur.fetchall()])
        cur.close()
        conn.commit()
    finally:
        conn.close()
        engine.dispose()
    return out


def clear(url: str, tables: list[str]) -> None:
    """Delete every row of the tables (children first: the reverse of `tables`)."""
    engine, conn = _raw(url)
    try:
        cur = conn.cursor()
        for t in reversed(tables):
            cur.execute(f'DELETE FROM "{t}"')
        cur.close()
        conn.commit()
    finally:
        conn.close()
        engine.dispose()


def raw_insert(url: str, snap: Snapshot) -> float:
    """Seconds to write the snapshot back (COPY or executemany) and commit."""
    engine, conn = _raw(url)
    try:
        t0 = time.perf_counter()
        if url.startswith("postgresql"):
            raw = conn.driver_connection
            with raw.cursor() as cur:
                for t, (cols, rows) in snap.items():
                    names = ", ".join(f'"{c}"' for c in cols)
                    with cur.copy(f'COPY "{t}" ({names}) FROM STDIN') as cp:
                        for row in rows:
                            cp.write_row(row)
        else:
            cur = conn.cursor()
            for t, (cols, rows) in snap.items():
                names = ", ".join(f'"{c}"' for c in cols)
                marks = ", ".join("?" * len(cols))
                cur.executemany(f'INSERT INTO "{t}" ({names}) VALUES ({marks})', rows)
            cur.close()
        conn.commit()
        return time.perf_counter() - t0
    finally:
        conn.close()
        engine.dispose()
