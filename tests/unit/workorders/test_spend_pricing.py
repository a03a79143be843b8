"""Spend pricing without a database: the year boundary in the site's zone, fitted lamps."""

from __future__ import annotations

from datetime import UTC, datetime

from service.register.models import Site
from service.workorders.spend import fitted, year_start


def test_year_starts_on_the_sites_own_first_of_january() -> None:
    at = datetime(2026, 12, 31, 12, 0, tzinfo=UTC)  # already 1 January 2027 in Auckland
    auckland = year_start(Site(time_zone="Pacific/Auckland"), at)
    lisbon = year_start(Site(time_zone="Europe/Lisbon"), at)
    assert (auckland.year, lisbon.year) == (2027, 2026)
    assert auckland.astimezone(UTC) == datetime(2026, 12, 31, 11, 0, tzinfo=UTC)  # NZDT +13


def test_skipped_positions_are_not_fitted() -> None:
    outcomes = [
        {"position_id": 1, "outcome": "replaced"},
        {"position_id": 2, "outcome": "found_dark"},
        {"position_id": 3, "outcome": "skipped", "reason": "blocked"},
    ]
    assert fitted(outcomes) == 2
    assert fitted(None) == 0
