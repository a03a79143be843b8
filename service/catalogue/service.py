"""Rules of the lamp catalogue. Services flush; the caller's session commits."""

from __future__ import annotations

from typing import Any

from pydantic import ValidationError
from sqlalchemy.exc import IntegrityError
from sqlalchemy.orm import Session

from service.api.errors import Conflict, Invalid, validation_errors
from service.catalogue import repository as repo
from service.catalogue.lamp_model import LampModel, resolve_lamp_model
from service.catalogue.models import LampType
from service.catalogue.schemas import (
    LAMP_TYPE_FIELDS,
    LampModelRead,
    LampTypeCreate,
    LampTypeRead,
    LampTypeUpdate,
    cross_check,
)
from service.db.crud import get_or_404


def get_lamp_type(session: Session, lamp_type_id: int) -> LampType:
    """A lamp type by id (404 if missing)."""
    return get_or_404(session, LampType, lamp_type_id, "lamp type")


def lamp_model(lt: LampType) -> LampModel:
    """The resolved model numbers of a stored lamp type."""
    return resolve_lamp_model(lt)


def to_read(lt: LampType) -> LampTypeRead:
    """The read form of a lamp type, with its resolved model block."""
    out = LampTypeRead.model_validate(lt)
    out.model = LampModelRead.of(resolve_lamp_model(lt))
    return out


def _check_whole(values: dict[str, Any]) -> None:
    problems = cross_check(values)
    if problems:
        raise Invalid(
            "The lamp type breaks a rule across fields: "
            + "; ".join(f"{f}: {m}" for f, m in problems),
            errors=[{"field": f, "in": "body", "message": m} for f, m in problems],
        )


def create_lamp_type(session: Session, body: LampTypeCreate) -> LampType:
    """Add a lamp type; codes are unique."""
    values = body.stored_values()
    _check_whole(values)
    if repo.code_taken(session, body.code):
        raise Conflict(f"A lamp type with code '{body.code}' already exists.", field="code")
    lt = LampType(**values)
    session.add(lt)
    session.flush()
    return lt


def current_values(lt: LampType) -> dict[str, Any]:
    """A stored lamp type's client-settable fields."""
    return {name: getattr(lt, name) for name in LAMP_TYPE_FIELDS}


def update_lamp_type(session: Session, lamp_type_id: int, body: LampTypeUpdate) -> LampType:
    """Change the fields sent; the result must pass the same rules as a new lamp type."""
    lt = get_lamp_type(session, lamp_type_id)
    changes = body.model_dump(exclude_unset=True)
    merged = {**current_values(lt), **changes}
    try:
        whole = LampTypeCreate.model_validate(merged)
    except ValidationError as exc:
        errors = validation_errors(list(exc.errors()))
        fields = ", ".join(sorted({e["field"] for e in errors}))
        raise Invalid(f"The updated lamp type is invalid: {fields}.", errors=errors) from None
    values = whole.stored_values()
    _check_whole(values)
    if whole.code != lt.code and repo.code_taken(session, whole.code, exclude_id=lamp_type_id):
        raise Conflict(f"A lamp type with code '{whole.code}' already exists.", field="code")
    for name in changes:
        setattr(lt, name, values[name])
    session.flush()
    return lt


def delete_lamp_type(session: Session, lamp_type_id: int, *, fixtures: int) -> None:
    """Delete a lamp type no fixture uses (409 naming how many do).

    fixtures: how many fixtures hold it, counted by the caller on the register's side
    (register.repository.fixtures_using_lamp_type): the register depends on the catalogue,
    never the other way.
    """
    lt = get_lamp_type(session, lamp_type_id)
    n = fixtures
    if n:
        raise Conflict(
            f"Lamp type '{lt.code}' is used by {n} fixture(s); move them to another type first.",
            fixtures=n,
        )
    try:
        with session.begin_nested():
            session.delete(lt)
            session.flush()
    except IntegrityError:
        raise Conflict(
            f"Lamp type '{lt.code}' is still referenced by lamp history or work orders.",
        ) from None
