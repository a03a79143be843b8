"""Rules for fixtures and their lamp positions."""

from __future__ import annotations

from datetime import UTC, date, datetime, time, timedelta
from typing import Any

from sqlalchemy.orm import Session

from service.api.errors import Conflict, Invalid, NotFound
from service.api.lookups import refuse_taken_reference
from service.catalogue.models import LampType
from service.db.base import utcnow
from service.db.crud import get_or_404
from service.register import repository as repo
from service.register.history import (
    check_fixture,
    check_positions,
    delete_checked,
    refuse_retired,
)
from service.register.models import Area, Fixture, LampPosition
from service.register.schemas import FixtureCreate, FixtureUpdate, PositionUpdate
from service.reliability.technologies import TECHNOLOGY_DEFAULTS

# Clock skew allowed before an install time counts as "in the future".
FUTURE_SLACK = timedelta(minutes=5)


def _missing(label: str, field: str, value: int) -> NotFound:
    return NotFound(
        f"{field} {value}: no such {label}.",
        errors=[{"field": field, "in": "body", "message": f"no such {label}"}],
        resource=label,
        id=value,
        field=field,
    )


def _invalid(field: str, message: str) -> Invalid:
    return Invalid(
        f"{field}: {message}.", errors=[{"field": field, "in": "body", "message": message}]
    )


def get_fixture(session: Session, fixture_id: int) -> Fixture:
    """A fixture by id (404 if missing)."""
    return get_or_404(session, Fixture, fixture_id, "fixture")


def lamp_ballast(lt: LampType) -> str:
    """The ballast behaviour a lamp type runs on: its catalogue value, else the default."""
    return lt.ballast_behaviour or TECHNOLOGY_DEFAULTS[lt.technology].default_ballast


def ballast_problem(technology: str, ballast: str) -> str | None:
    """Why a ballast kind does not fit a lamp technology, or None when it does."""
    filament = TECHNOLOGY_DEFAULTS[technology].is_filament
    if filament and ballast != "none":
        return f"a {technology} lamp runs straight off the line: ballast_kind must be 'none'"
    if not filament and ballast == "none":
        return f"a {technology} lamp needs a ballast or driver, not 'none'"
    return None


def default_install_time(installed_on: date | None, now: datetime | None = None) -> datetime:
    """When lamps went in if not given: installed_on at 00:00 UTC, else now."""
    if installed_on is not None:
        return datetime.combine(installed_on, time(0), tzinfo=UTC)
    return now or utcnow()


def as_utc(when: datetime) -> datetime:
    """A timestamp in UTC (a time without an offset is taken as UTC)."""
    return when.replace(tzinfo=UTC) if when.tzinfo is None else when.astimezone(UTC)


def in_future(when: datetime, now: datetime | None = None) -> bool:
    """True when a timestamp lies ahead of now (beyond a little clock skew)."""
    return as_utc(when) > (now or utcnow()) + FUTURE_SLACK


def position_rows(
    fixture_id: int, first_no: int, last_no: int, at: datetime, hours: float, starts: float
) -> list[dict[str, Any]]:
    """Values of new lamp positions first_no..last_no (inclusive) of a fixture."""
    return [
        {
            "fixture_id": fixture_id,
            "position_no": n,
            "lamp_installed_at": at,
            "hours_at_install": hours,
            "starts_at_install": starts,
            "burned_out_at": None,
        }
        for n in range(first_no, last_no + 1)
    ]


def create_fixture(session: Session, body: FixtureCreate) -> Fixture:
    """Add a fixture with lamps_per_fixture lamp positions; tags are unique within a site."""
    area = session.get(Area, body.area_id)
    if area is None:
        raise _missing("area", "area_id", body.area_id)
    lt = session.get(LampType, body.lamp_type_id)
    if lt is None:
        raise _missing("lamp type", "lamp_type_id", body.lamp_type_id)
    refuse_retired("area", "area_id", area)
    refuse_retired("lamp type", "lamp_type_id", lt)
    ballast = body.ballast_kind or lamp_ballast(lt)
    problem = ballast_problem(lt.technology, ballast)
    if problem:
        raise _invalid("ballast_kind", problem)
    if repo.tag_taken(session, area.site_id, body.tag):
        raise Conflict(f"The site already has a fixture tagged '{body.tag}'.", field="tag")
    refuse_taken_reference(session, Fixture, body.external_reference, "Fixture")
    at = as_utc(body.lamps_installed_at or default_install_time(body.installed_on))
    if in_future(at):
        field = "lamps_installed_at" if body.lamps_installed_at else "installed_on"
        raise _invalid(field, "the lamps cannot go in after now")
    values = body.model_dump(
        exclude={"lamps_installed_at", "lamp_hours_at_install", "lamp_starts_at_install"}
    )
    fixture = Fixture(**{**values, "ballast_kind": ballast, "site_id": area.site_id})
    for row in position_rows(
        0, 1, body.lamps_per_fixture, at, body.lamp_hours_at_install, body.lamp_starts_at_install
    ):
        row.pop("fixture_id")
        fixture.positions.append(LampPosition(**row))
    session.add(fixture)
    session.flush()
    return fixture


def update_fixture(session: Session, fixture_id: int, body: FixtureUpdate) -> Fixture:
    """Change the fields sent; extra positions are added or dropped at the end."""
    fixture = get_fixture(session, fixture_id)
    sent = body.model_dump(exclude_unset=True)
    for required in ("tag", "area_id", "lamp_type_id", "lamps_per_fixture", "ballast_kind"):
        if required in sent and sent[required] is None:
            raise _invalid(required, "cannot be null")
    if "area_id" in sent and sent["area_id"] != fixture.area_id:
        area = session.get(Area, sent["area_id"])
        if area is None:
            raise _missing("area", "area_id", sent["area_id"])
        if area.site_id != fixture.site_id:
            raise _invalid("area_id", "a fixture can move only to an area of its own site")
        refuse_retired("area", "area_id", area)
    lt = session.get(LampType, sent.get("lamp_type_id", fixture.lamp_type_id))
    if lt is None:
        raise _missing("lamp type", "lamp_type_id", sent["lamp_type_id"])
    if "lamp_type_id" in sent and sent["lamp_type_id"] != fixture.lamp_type_id:
        refuse_retired("lamp type", "lamp_type_id", lt)
    if "lamp_type_id" in sent and "ballast_kind" not in sent:
        old = session.get(LampType, fixture.lamp_type_id)
        if old is not None and fixture.ballast_kind == lamp_ballast(old):
            sent["ballast_kind"] = lamp_ballast(lt)  # followed the old type: follow the new
    problem = ballast_problem(lt.technology, sent.get("ballast_kind", fixture.ballast_kind))
    if problem:
        raise _invalid("ballast_kind", problem)
    tag = sent.get("tag")
    if tag is not None and repo.tag_taken(session, fixture.site_id, tag, exclude_id=fixture_id):
        raise Conflict(f"The site already has a fixture tagged '{tag}'.", field="tag")
    refuse_taken_reference(
        session, Fixture, sent.get("external_reference"), "Fixture", exclude_id=fixture_id
    )
    new_count = sent.get("lamps_per_fixture", fixture.lamps_per_fixture)
    positions = list(fixture.positions)
    if new_count > len(positions):
        now = utcnow()
        for row in position_rows(0, len(positions) + 1, new_count, now, 0.0, 0.0):
            row.pop("fixture_id")
            fixture.positions.append(LampPosition(**row))
    elif new_count < len(positions):
        # Positions with removals or reports stay: their history would block the delete.
        check_positions(session, [p.id for p in positions[new_count:]])
        for pos in positions[new_count:]:
            fixture.positions.remove(pos)  # delete-orphan removes the row
    for name, value in sent.items():
        setattr(fixture, name, value)
    session.flush()
    return fixture


def delete_fixture(session: Session, fixture_id: int) -> None:
    """Delete a fixture without history (409 naming the history otherwise)."""
    delete_checked(session, get_fixture(session, fixture_id), "The fixture", check_fixture)


def list_positions(session: Session, fixture_id: int) -> list[LampPosition]:
    """A fixture's lamp positions (404 for an unknown fixture)."""
    get_fixture(session, fixture_id)
    return repo.positions_of(session, fixture_id)


def get_position(session: Session, position_id: int) -> LampPosition:
    """A lamp position by id (404 if missing)."""
    return get_or_404(session, LampPosition, position_id, "lamp position")


def update_position(session: Session, position_id: int, body: PositionUpdate) -> LampPosition:
    """Correct when a position's lamp went in and its burn hours and starts then."""
    pos = get_position(session, position_id)
    sent = body.model_dump(exclude_unset=True)
    for name, value in sent.items():
        if value is None:
            raise _invalid(name, "cannot be null")
    if "lamp_installed_at" in sent:
        if in_future(sent["lamp_installed_at"]):
            raise _invalid("lamp_installed_at", "the lamp cannot go in after now")
        sent["lamp_installed_at"] = as_utc(sent["lamp_installed_at"])
    for name, value in sent.items():
        setattr(pos, name, value)
    session.flush()
    return pos
