"""db/crud.ListQuery.binds and bound_where: the same filters as a statement built once.

The fixture list (register.repository.fixture_list_page) builds its statements once per set
of filter names and binds the values per request; these check that the bound form applies
the rules of ListQuery.__call__ (tests/unit/db/test_list_query.py): None and "" are not
applied, False is a value, a fragment is found in any case, include_retired defaults to True.
"""

from __future__ import annotations

import pytest
from sqlalchemy import select
from sqlalchemy.dialects import sqlite

from service.db.crud import ListQuery
from service.events.models import LampRemoval
from service.register.models import Site

SITES = ListQuery(Site, equal=("time_zone",), contains={"name": "name"}, retired=True)
REMOVALS = ListQuery(LampRemoval, equal=("failed", "site_id"))


def _sql(q: ListQuery, names: tuple[str, ...]) -> tuple[str, set[str]]:
    """The WHERE clause as SQLite sees it and the names of its bind parameters."""
    stmt = select(q.model.id).where(*q.bound_where(names))
    assert stmt.whereclause is not None
    compiled = stmt.whereclause.compile(dialect=sqlite.dialect())
    return str(compiled), set(compiled.binds)


def test_only_given_filters_bind_in_declared_order() -> None:
    assert SITES.binds() == {}
    assert SITES.binds(time_zone=None, name="", include_retired=True) == {}
    got = SITES.binds(name="Depot", include_retired=False, time_zone="UTC")
    assert list(got) == ["time_zone", "name", "active"]
    assert got == {"time_zone": "UTC", "name": "%Depot%", "active": None}


def test_false_is_a_value() -> None:
    assert REMOVALS.binds(failed=False) == {"failed": False}


def test_unknown_filter_is_refused() -> None:
    with pytest.raises(TypeError, match="unknown filters"):
        SITES.binds(colour="red")
    with pytest.raises(TypeError, match="unknown filters"):
        REMOVALS.binds(include_retired=False)  # no retired filter declared


def test_bound_conditions_name_their_parameters() -> None:
    sql, params = _sql(SITES, ("time_zone", "name", "active"))
    assert sql == (
        "sites.time_zone = ? AND lower(sites.name) LIKE lower(?) AND sites.retired_at IS NULL"
    )
    assert params == {"time_zone", "name"}  # "active" has no value
    assert _sql(REMOVALS, ("failed",)) == ("lamp_removals.failed = ?", {"failed"})
