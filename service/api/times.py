"""Timestamps and dates in requests: years 1900-2199, and local times that exist.

A far date such as 0001-01-01T00:00:00+14:00 or 9999-12-31T23:59:59-12:00 parses, but
turning it into UTC or adding a day to it overflows Python's datetime (a 500). No lamp
record needs a year outside this window, so the schema refuses it, naming the field.
"""

from __future__ import annotations

from datetime import UTC, date, datetime
from typing import Annotated
from zoneinfo import ZoneInfo

from pydantic import AfterValidator

MIN_YEAR, MAX_YEAR = 1900, 2199
YEARS = f"years {MIN_YEAR}-{MAX_YEAR}"


def year_problem(value: date) -> str | None:
    """Why a date or timestamp lies outside the accepted years, or None."""
    if MIN_YEAR <= value.year <= MAX_YEAR:
        return None
    return f"must lie in {YEARS}"


def _checked(value: date) -> date:
    problem = year_problem(value)
    if problem:
        raise ValueError(problem)
    return value


def _checked_time(value: datetime) -> datetime:
    _checked(value)
    return value


def in_zone(naive: datetime, zone: ZoneInfo) -> datetime:
    """A wall-clock time in a zone; ValueError if the clocks skip it (a DST gap)."""
    aware = naive.replace(tzinfo=zone)
    back = aware.astimezone(UTC).astimezone(zone).replace(tzinfo=None)
    if back != naive:
        raise ValueError(
            f"{naive.isoformat()} does not exist in {zone.key} (the clocks skip it); "
            "give a UTC offset"
        )
    return aware


# A date-time in a request body or query string.
Timestamp = Annotated[datetime, AfterValidator(_checked_time)]
# A calendar date in a request body.
Day = Annotated[date, AfterValidator(_checked)]
