"""The models describe exactly the schema the migrations build (Alembic autogenerate compare).

alembic.autogenerate.compare_metadata lists what `alembic revision --autogenerate` would
write: every table, column, type, nullability, server default, index, unique constraint and
foreign key the models declare but the migrated database lacks, or the reverse.
"""

from __future__ import annotations

from typing import Any

from alembic.autogenerate import compare_metadata
from alembic.migration import MigrationContext
from sqlalchemy import Column, Engine, Integer, MetaData, Table

import service.models_registry  # noqa: F401  (every domain's tables on Base.metadata)
from service.db.base import Base

# Differences compare_metadata reports that are not drift; each with its reason. None today.
IGNORED: tuple[tuple[str, str], ...] = ()


def _name(diff: Any) -> tuple[str, str]:
    """(operation, object name) of one difference, for the ignore list and the message."""
    op = diff[0][0] if isinstance(diff, list) else diff[0]
    item = diff[0] if isinstance(diff, list) else diff
    obj = item[-1] if not isinstance(item[-1], (bool, type(None), dict)) else item[2]
    return str(op), str(getattr(obj, "name", obj))


def _differences(engine: Engine, metadata: MetaData) -> list[Any]:
    with engine.connect() as conn:
        ctx = MigrationContext.configure(
            conn, opts={"compare_type": True, "compare_server_default": True}
        )
        return list(compare_metadata(ctx, metadata))


def test_models_match_the_migrated_schema(engine: Engine) -> None:
    diffs = _differences(engine, Base.metadata)
    drift = [d for d in diffs if _name(d) not in IGNORED]
    assert drift == [], "models and migrations disagree:\n" + "\n".join(map(repr, drift))


def test_every_model_table_is_compared() -> None:
    # The registry must hold every domain's tables, or the comparison above would miss them.
    expected = {"sites", "areas", "lamp_types", "fixtures", "work_orders", "api_keys", "users"}
    assert expected <= set(Base.metadata.tables)


def test_a_planted_difference_is_found(engine: Engine) -> None:
    # The comparison itself works: a column only the models have is reported.
    md = MetaData()
    for table in Base.metadata.tables.values():
        table.to_metadata(md)
    Table("sites", md, Column("planted_extra", Integer), extend_existing=True)
    assert ("add_column", "planted_extra") in [_name(d) for d in _differences(engine, md)]
