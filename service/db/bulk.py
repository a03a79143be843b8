"""Set-based statements over many ids: one bound value per list, not one per id.

in_ids(column, ids): `column = ANY(:ids)` with one bound integer array on PostgreSQL (the
planner sees the array's length and takes the index; an IN of thousands of literals costs
a bound parameter each to render and parse); on SQLite `column IN (SELECT value FROM
json_each(:ids))`, one JSON text (no limit on bound variables, no chunking).

id_pairs(session, names, first, second): a derived table of integer pairs (report id ->
order id, area id -> order id) to UPDATE ... FROM: unnest of two bound arrays on
PostgreSQL, json_each of one JSON text on SQLite. One statement for any number of rows, its
SQL the same every time (compiled once), instead of an IN list beside a CASE of one WHEN
per row.
"""

from __future__ import annotations

import json
from collections.abc import Sequence
from typing import Any

from sqlalchemy import ColumnElement, FromClause, Integer, any_, bindparam, func, select
from sqlalchemy.dialects.postgresql import ARRAY
from sqlalchemy.orm import Session


def _dialect(session: Session) -> str:
    return str(session.get_bind().dialect.name)


def in_ids(session: Session, column: Any, ids: Sequence[int]) -> ColumnElement[bool]:
    """column is one of these integer ids (one bound value for all of them)."""
    values = [int(i) for i in ids]
    if _dialect(session) == "postgresql":
        out: ColumnElement[bool] = column == any_(
            bindparam(None, values, type_=ARRAY(Integer), unique=True)
        )
        return out
    each = func.json_each(bindparam(None, json.dumps(values), unique=True)).table_valued("value")
    return column.in_(select(each.c.value))


def id_pairs(
    session: Session, names: tuple[str, str], first: Sequence[int], second: Sequence[int]
) -> FromClause:
    """A derived table of integer pairs with columns `names` (parallel lists, one row each)."""
    if len(first) != len(second):
        raise ValueError("id_pairs needs one second value per first value")
    a, b = [int(x) for x in first], [int(x) for x in second]
    if _dialect(session) == "postgresql":
        arrays = (bindparam(None, v, type_=ARRAY(Integer), unique=True) for v in (a, b))
        return func.unnest(*arrays).table_valued(*names).render_derived(name="pairs")
    each = func.json_each(
        bindparam(None, json.dumps(list(zip(a, b, strict=True))), unique=True)
    ).table_valued("value")
    return select(
        func.json_extract(each.c.value, "$[0]").label(names[0]),
        func.json_extract(each.c.value, "$[1]").label(names[1]),
    ).subquery("pairs")
