"""db/crud.ListQuery: the list filters every repository declares once, compiled to SQL.

The rules checked are the ones the hand-written queries had: a filter left at None (or an
empty string) is not applied, False is a value (failed=false lists the removals still
burning), include_retired defaults to True for the repository, unknown names are refused.
"""

from __future__ import annotations

import pytest
from sqlalchemy.dialects import sqlite

from service.db.crud import ListQuery, sort_columns
from service.events.models import LampRemoval
from service.register.models import Site

SITES = ListQuery(Site, equal=("time_zone",), contains={"name": "name"}, retired=True)
REMOVALS = ListQuery(LampRemoval, equal=("failed", "site_id"))


def _where(q: ListQuery, **given: object) -> str:
    stmt = q(**given)
    if stmt.whereclause is None:
        return ""
    return str(stmt.whereclause.compile(dialect=sqlite.dialect()))


def test_unset_and_empty_filters_are_not_applied() -> None:
    assert _where(SITES) == ""
    assert _where(SITES, time_zone=None, name=None) == ""
    assert _where(SITES, time_zone="", name="") == ""


def test_false_is_a_filter_value_not_an_absent_one() -> None:
    assert "failed" in _where(REMOVALS, failed=False)
    assert _where(REMOVALS, failed=None) == ""


def test_contains_is_a_case_insensitive_fragment_and_retired_rows_hide_on_request() -> None:
    where = _where(SITES, name="depot", include_retired=False)
    assert "lower(sites.name) LIKE lower(?)" in where
    assert "sites.retired_at IS NULL" in where
    assert "retired_at" not in _where(SITES, name="depot")  # the repository default keeps them


def test_an_unknown_filter_is_refused() -> None:
    with pytest.raises(TypeError, match="unknown filters"):
        SITES(tag="x")
    with pytest.raises(TypeError, match="unknown filters"):
        REMOVALS(include_retired=False)  # not a retirable list


def test_sort_columns_name_the_model_columns() -> None:
    assert sort_columns(Site, "name", "id") == {"name": Site.name, "id": Site.id}
