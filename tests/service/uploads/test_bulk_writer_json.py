"""JSON columns through the bulk writer: stored as the same text an ORM insert stores.

The writer encodes JSON values itself (json.dumps, as SQLAlchemy's JSON type and
psycopg's Json dumper do); the ORM insert beside it is the reference, on this run's
database (SQLite text, PostgreSQL json).
"""

from __future__ import annotations

from typing import Any

from sqlalchemy import Table, Text, cast, null, select
from sqlalchemy.orm import Session

from service.catalogue.models import LampType
from service.uploads.write import write_rows

LAMP_TYPES: Table = LampType.__table__  # type: ignore[assignment]

VALUES: list[Any] = [
    [101, 102, 103],
    [-7, 0, 2**40],  # the writer's quick path for lists of ints
    [True, 1, 2],  # bools are ints to Python, true to JSON: not the quick path
    {"note": 'tab\there, "quoted", back\\slash, ünïcödé', "points": [1.5, None, -2e-9]},
    [],
    None,  # JSON null, as the ORM stores None in a JSON column
]


def _stored(db: Session, prefix: str) -> list[tuple[str | None, Any]]:
    rows = db.execute(
        select(cast(LampType.extra, Text), LampType.extra)
        .where(LampType.code.like(f"{prefix}%"))
        .order_by(LampType.code)
    ).all()
    return [(t, v) for t, v in rows]


def test_json_values_stored_as_the_orm_stores_them(db: Session) -> None:
    base = {"technology": "incandescent", "rated_watts": 60.0, "rated_volts": 230.0}
    for i, v in enumerate(VALUES):
        db.add(LampType(code=f"ORM-{i}", rated_life_h=1000.0, extra=v, **base))
    db.flush()
    n = len(VALUES)
    write_rows(
        db,
        LAMP_TYPES,
        {
            "code": [f"BULK-{i}" for i in range(n)],
            "rated_life_h": [1000.0] * n,
            "extra": VALUES,
            **{k: [v] * n for k, v in base.items()},
        },
    )
    db.expire_all()
    orm, bulk = _stored(db, "ORM-"), _stored(db, "BULK-")
    assert bulk == orm
    assert [v for _, v in bulk] == VALUES  # read back as written
    assert bulk[5][0] == "null"  # None is JSON null text, not SQL NULL
    assert [t for t, _ in bulk[:3]] == ["[101, 102, 103]", "[-7, 0, 1099511627776]", "[true, 1, 2]"]


def test_sql_null_stays_null(db: Session) -> None:
    base = {"technology": "incandescent", "rated_watts": 60.0, "rated_volts": 230.0}
    write_rows(
        db,
        LAMP_TYPES,
        {"code": ["BULK-NULL"], "rated_life_h": [1000.0], "extra": [null()], **{
            k: [v] for k, v in base.items()
        }},
    )  # fmt: skip
    found = db.scalar(
        select(LampType.id).where(LampType.code == "BULK-NULL", LampType.extra.is_(None))
    )
    assert found is not None
