"""cheaper change-feed triggers on PostgreSQL for bulk writes

Revision ID: 0019_weekly
Revises: 0018
Create Date: 2026-12-03

The PostgreSQL change functions (migrations/versions/0011_changes.py) are re-made in the
"json" form: each change's body is row_to_json of the row instead of to_jsonb cast back to
the json column, and the function sorts a statement's rows in memory (its own work_mem)
instead of spilling them to disk. A weekly run at 100,000 fixtures inserts some 40,000
order lines in one statement; the trigger was most of the server's time for that COPY.
Rows, ids, kinds, versions and the bodies' JSON values are the same as before (key order
and spacing of the body text may differ; JSON readers see the same object). SQLite's row
triggers are unchanged.
"""

import importlib.util
import pathlib
from collections.abc import Sequence
from typing import Any

from alembic import op

revision: str = "0019_weekly"
down_revision: str | None = "0018"
branch_labels: str | Sequence[str] | None = None
depends_on: str | Sequence[str] | None = None


def _feed() -> Any:
    """The 0011 migration module (its name starts with a digit: loaded by path)."""
    path = pathlib.Path(__file__).with_name("0011_changes.py")
    spec = importlib.util.spec_from_file_location("changes_0011", path)
    assert spec is not None and spec.loader is not None
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module


def upgrade() -> None:
    if op.get_bind().dialect.name == "postgresql":
        _feed().create_triggers(op, pg_form="json")


def downgrade() -> None:
    if op.get_bind().dialect.name == "postgresql":
        _feed().create_triggers(op, pg_form="jsonb")
