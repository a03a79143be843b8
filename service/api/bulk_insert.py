"""Fast bulk INSERT for upload paths shared by every domain (no ORM object per row).

bulk_insert(conn, table, rows) writes a list of same-keyed dicts in one go: COPY on
PostgreSQL with psycopg 3, the sqlite3 driver's executemany on SQLite, Core executemany in
chunks elsewhere. Values pass through each column type's own bind processor (memoised, as
many rows share one timestamp), so they are stored exactly as an ORM insert stores them.
Runs inside the caller's transaction: a later error rolls it all back.
"""

from __future__ import annotations

from collections.abc import Callable
from operator import itemgetter
from typing import Any

from sqlalchemy import Connection, Table, insert

CHUNK = 5000  # rows per executemany call on the generic path


def chunks(items: list[dict[str, Any]], size: int = CHUNK) -> list[list[dict[str, Any]]]:
    """Split rows into lists of at most `size` for executemany calls."""
    return [items[i : i + size] for i in range(0, len(items), size)]


def bulk_insert(conn: Connection, table: Table, rows: list[dict[str, Any]]) -> None:
    """Insert many same-keyed rows into a table within the connection's transaction."""
    if not rows:
        return
    cols = list(rows[0])
    raw: Any = conn.connection.driver_connection
    name = conn.dialect.name
    if name == "postgresql" and conn.dialect.driver == "psycopg":
        names = ", ".join(f'"{c}"' for c in cols)
        with raw.cursor() as cur, cur.copy(f'COPY "{table.name}" ({names}) FROM STDIN') as cp:
            for r in rows:
                cp.write_row([r[c] for c in cols])
        return
    if name == "sqlite":
        dialect = conn.dialect
        procs = [
            (i, _memo(proc))
            for i, c in enumerate(cols)
            if (proc := table.c[c].type.dialect_impl(dialect).bind_processor(dialect))
        ]
        sql = 'INSERT INTO "{}" ({}) VALUES ({})'.format(
            table.name, ", ".join(f'"{c}"' for c in cols), ", ".join("?" for _ in cols)
        )
        get = itemgetter(*cols)

        def values(r: dict[str, Any]) -> list[Any]:
            v = list(get(r)) if len(cols) > 1 else [get(r)]
            for i, p in procs:
                v[i] = p(v[i])
            return v

        cur = raw.cursor()
        try:
            cur.executemany(sql, map(values, rows))
        finally:
            cur.close()
        return
    for chunk in chunks(rows):
        conn.execute(insert(table), chunk)


def _memo(proc: Callable[[Any], Any]) -> Callable[[Any], Any]:
    """A bind processor that remembers its answers."""
    seen: dict[Any, Any] = {}

    def run(v: Any) -> Any:
        try:
            return seen[v]
        except KeyError:
            seen[v] = out = proc(v)
            return out

    return run
