"""The tier markers tests/conftest.py puts on every test (`pytest -m unit`)."""

from __future__ import annotations

import pytest

from tests.conftest import TESTS, tier_of


@pytest.mark.parametrize(
    ("where", "fixtures", "tier"),
    [
        ("unit/readings/test_x.py", set(), "unit"),
        ("service/db/test_x.py", {"engine"}, "service"),
        ("http/scheduling/test_x.py", {"own_db_url"}, "http"),  # its folder decides
        ("browser/test_x.py", {"db_url"}, "browser"),
        ("register/test_x.py", {"client", "db", "db_url"}, "http"),
        ("register/test_x.py", {"db", "db_url"}, "service"),
        ("reliability/test_x.py", {"tmp_path"}, "unit"),
    ],
)
def test_tier_by_folder_then_fixtures(where: str, fixtures: set[str], tier: str) -> None:
    assert tier_of(TESTS / where, fixtures) == tier


def test_this_test_carries_the_unit_marker(request: pytest.FixtureRequest) -> None:
    assert request.node.get_closest_marker("unit") is not None
    assert request.node.get_closest_marker("service") is None
