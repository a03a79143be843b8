"""Queries for weekly-run records: the filtered list and its sort whitelist."""

from __future__ import annotations

from typing import Any

from sqlalchemy import Select, select

from service.scheduling.models import RunOutcome, WeeklyRun

RUN_SORT = {"id": WeeklyRun.id, "started_at": WeeklyRun.started_at, "iso_week": WeeklyRun.iso_week}


def run_query(
    *, site_id: int | None, iso_week: str | None, outcome: RunOutcome | None
) -> Select[Any]:
    """Weekly runs filtered by site, ISO week and outcome (each filter only when given)."""
    wanted = (
        (WeeklyRun.site_id, site_id),
        (WeeklyRun.iso_week, iso_week),
        (WeeklyRun.outcome, outcome),
    )
    return select(WeeklyRun).where(*(col == value for col, value in wanted if value is not None))
