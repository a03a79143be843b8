"""History that blocks a hard delete: counts of rows a cascade would drop.

The rows that record what happened (removals, readings, reports, orders, runs) belong to
domains above the register, so the register does not import them: each is declared as a
`HistorySource` by `service.retirement.history`, which fills this module's list when the
retirement package is imported (the app always imports it). The counts keep the order of
that declaration, so a 409 names the blocking history in one order every time.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass
from typing import Any

from sqlalchemy import ColumnElement, Select, func, or_, select
from sqlalchemy.exc import IntegrityError
from sqlalchemy.orm import QueryableAttribute, Session

from service.api.errors import Conflict
from service.register.models import Area, Fixture

Column = QueryableAttribute[Any]


@dataclass(frozen=True)
class HistorySource:
    """One table of history rows and its columns that point at the register (None: no such column).

    A site check with `site` set counts by the site alone; otherwise rows count when their
    fixture is among the fixtures or their area among the areas checked.
    """

    label: str  # as the 409 names the rows, plural: "removals"
    model: type
    fixture: Column | None = None
    position: Column | None = None
    area: Column | None = None
    site: Column | None = None

    def condition(
        self, fixtures: Select[int], areas: Select[int] | None, site_id: int | None
    ) -> ColumnElement[bool] | None:
        """Which rows of this table are history of what is checked (None: none can be)."""
        if self.site is not None and site_id is not None:
            return self.site == site_id
        parts = [] if self.fixture is None else [self.fixture.in_(fixtures)]
        if self.area is not None and areas is not None:
            parts.append(self.area.in_(areas))
        return or_(*parts) if parts else None


_SOURCES: list[HistorySource] = []


def register_history_source(*sources: HistorySource) -> None:
    """Declare tables of history rows; a label declared again replaces the earlier entry."""
    for source in sources:
        known = [i for i, s in enumerate(_SOURCES) if s.label == source.label]
        if known:
            _SOURCES[known[0]] = source
        else:
            _SOURCES.append(source)


def history_sources() -> tuple[HistorySource, ...]:
    """The declared history tables, in declaration order; refuses to check with none declared."""
    if not _SOURCES:
        # Checking against nothing would let a delete drop history: fail loudly instead.
        raise RuntimeError("no history sources declared: import service.retirement first")
    return tuple(_SOURCES)


def _count(session: Session, model: type, where: ColumnElement[bool]) -> int:
    """Rows of one table matching a condition."""
    return int(session.scalar(select(func.count()).select_from(model).where(where)) or 0)


def history_counts(
    session: Session,
    fixtures: Select[int],
    areas: Select[int] | None,
    site_id: int | None = None,
) -> dict[str, int]:
    """Counts of history rows under the given fixtures, areas and site (non-zero only)."""
    counts = {}
    for source in history_sources():
        where = source.condition(fixtures, areas, site_id)
        n = _count(session, source.model, where) if where is not None else 0
        if n:
            counts[source.label] = n
    return counts


def refuse_if_history(what: str, counts: dict[str, int]) -> None:
    """Raise 409 naming the history that blocks a hard delete."""
    if counts:
        listed = ", ".join(f"{n} {name}" for name, n in counts.items())
        raise Conflict(
            f"{what} has history ({listed}); deleting it would lose that history.",
            blocking=counts,
        )


def delete_without_history(session: Session, what: str, row: object) -> None:
    """Hard-delete a row whose history was checked; a RESTRICT hit (history added meanwhile) is 409."""
    try:
        with session.begin_nested():  # a savepoint, so the request can still answer
            session.delete(row)
            session.flush()
    except IntegrityError:
        raise Conflict(
            f"{what} gained history while being deleted; nothing was deleted. Retire it instead.",
        ) from None


def delete_checked(
    session: Session, row: Any, what: str, check: Callable[[Session, int], None]
) -> None:
    """Hard-delete a row once `check` finds no history (409 naming the history otherwise)."""
    check(session, row.id)
    delete_without_history(session, what, row)


def check_positions(session: Session, position_ids: list[int]) -> None:
    """409 if lamp positions about to be dropped have history (removals, burnout reports)."""
    if not position_ids:
        return
    counts = {
        source.label: _count(session, source.model, source.position.in_(position_ids))
        for source in history_sources()
        if source.position is not None
    }
    refuse_if_history("A lamp position to drop", {k: v for k, v in counts.items() if v})


def check_site(session: Session, site_id: int) -> None:
    """409 if the site has any history."""
    fx = select(Fixture.id).where(Fixture.site_id == site_id)
    ar = select(Area.id).where(Area.site_id == site_id)
    refuse_if_history("The site", history_counts(session, fx, ar, site_id))


def check_area(session: Session, area_id: int) -> None:
    """409 if the area has any history."""
    fx = select(Fixture.id).where(Fixture.area_id == area_id)
    ar = select(Area.id).where(Area.id == area_id)
    refuse_if_history("The area", history_counts(session, fx, ar))


def check_fixture(session: Session, fixture_id: int) -> None:
    """409 if the fixture has any history."""
    fx = select(Fixture.id).where(Fixture.id == fixture_id)
    refuse_if_history("The fixture", history_counts(session, fx, None))


def refuse_retired(label: str, field: str, record: Any) -> None:
    """409 when something new would be added under (or on) a retired record."""
    if record.retired_at is not None:
        raise Conflict(
            f"{field} {record.id}: the {label} is retired; nothing new can be added to it.",
            field=field,
            retired_at=record.retired_at.isoformat(),
        )
