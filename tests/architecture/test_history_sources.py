"""Every table whose rows block deleting a register record is declared to the delete checks.

The register counts history through `HistorySource` declarations (service.retirement.history)
instead of importing the domains above it, so nothing but this test ties a new history table
to the checks: a table with an ON DELETE RESTRICT key to sites, areas, fixtures or lamp
positions that is not declared would make a delete answer the bare "gained history" 409.
"""

from __future__ import annotations

import pytest

import service.models_registry  # (every domain's tables on Base.metadata)
import service.retirement  # noqa: F401  (declares the history sources)
from service.db.base import Base
from service.register import history

REGISTER_TABLES = {"sites", "areas", "fixtures", "lamp_positions"}


def restricting_tables() -> set[str]:
    """Tables with a RESTRICT foreign key into the register (their rows are history)."""
    return {
        table.name
        for table in Base.metadata.tables.values()
        for fk in table.foreign_keys
        if fk.column.table.name in REGISTER_TABLES and (fk.ondelete or "").upper() == "RESTRICT"
    }


def test_every_restricting_table_is_a_history_source() -> None:
    declared = {source.model.__table__.name for source in history.history_sources()}
    assert restricting_tables() == declared


def test_each_source_names_a_column_pointing_at_the_register() -> None:
    for source in history.history_sources():
        columns = [c for c in (source.fixture, source.position, source.area, source.site) if c]
        assert columns, source.label
        for column in columns:
            assert column.class_ is source.model, source.label


def test_checks_refuse_to_run_with_nothing_declared(monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.setattr(history, "_SOURCES", [])
    with pytest.raises(RuntimeError, match="no history sources"):
        history.history_sources()
