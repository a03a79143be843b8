"""Retirement: records with history are kept, marked retired, and left out of new work.

Its own package because a retirement spans the register, the catalogue and open work orders;
it sits above work orders in the layers so neither the register nor the catalogue imports them.
"""

from __future__ import annotations

from collections.abc import Sequence
from datetime import datetime
from typing import TypeVar

from sqlalchemy import ColumnElement, Select, select, update
from sqlalchemy.orm import Session

from service.api.errors import Conflict
from service.catalogue.models import LampType
from service.catalogue.service import get_lamp_type
from service.db.base import utcnow
from service.db.crud import get_or_404
from service.db.locks import lock_site
from service.register.models import Area, Fixture, Site
from service.workorders.issue import OPEN_STATES
from service.workorders.models import WorkOrder, WorkOrderLine

R = TypeVar("R", Site, Area, Fixture)


def open_orders_touching(session: Session, where: ColumnElement[bool]) -> list[int]:
    """Ids of open work orders with a line matching the condition (e.g. on given fixtures)."""
    stmt: Select[int] = (
        select(WorkOrder.id)
        .join(WorkOrderLine, WorkOrderLine.work_order_id == WorkOrder.id)
        .where(WorkOrder.state.in_(OPEN_STATES), where)
        .distinct()
        .order_by(WorkOrder.id)
    )
    return list(session.scalars(stmt))


def refuse_if_open_orders(what: str, order_ids: list[int]) -> None:
    """409 naming the open orders that must be settled before retiring."""
    if order_ids:
        listed = ", ".join(str(i) for i in order_ids)
        raise Conflict(
            f"{what} is on open work order(s) {listed}; complete or cancel them first.",
            work_orders=order_ids,
        )


def _retire_where(
    session: Session, model: type[Area] | type[Fixture], cond: ColumnElement[bool], at: datetime
) -> None:
    """Retire the not-yet-retired rows matching a condition, bumping their versions (ETags)."""
    session.execute(
        update(model)
        .where(cond, model.retired_at.is_(None))
        .values(retired_at=at, version=model.version + 1, updated_at=at)
        .execution_options(synchronize_session="fetch")
    )


def _retire(
    session: Session,
    row: R,
    site_id: int,
    refuse: tuple[str, ColumnElement[bool]],
    cascade: Sequence[tuple[type[Area] | type[Fixture], ColumnElement[bool]]] = (),
) -> R:
    """Retire a register row under its site's lock, with the rows below it; a repeat is a no-op.

    `refuse` is (what to name, the open-order lines it blocks on): 409 while any is open.
    """
    if row.retired_at is not None:
        return row
    lock_site(session, site_id)
    session.refresh(row)  # a retire that held the lock before us may have committed
    if row.retired_at is not None:
        return row  # the weekly run and new orders wait for this decision
    refuse_if_open_orders(refuse[0], open_orders_touching(session, refuse[1]))
    at = utcnow()
    for model, cond in cascade:
        _retire_where(session, model, cond, at)
    row.retired_at = at
    session.flush()
    return row


def retire_site(session: Session, site_id: int) -> Site:
    """Retire a site with its areas and fixtures; a repeat answers the site unchanged."""
    site = get_or_404(session, Site, site_id, "site")
    touching = ("A fixture of the site", WorkOrder.site_id == site_id)
    below: list[tuple[type[Area] | type[Fixture], ColumnElement[bool]]] = [
        (Area, Area.site_id == site_id),
        (Fixture, Fixture.site_id == site_id),
    ]
    return _retire(session, site, site_id, touching, below)


def retire_area(session: Session, area_id: int) -> Area:
    """Retire an area with its fixtures; a repeat answers the area unchanged."""
    area = get_or_404(session, Area, area_id, "area")
    touching = ("A fixture of the area", WorkOrder.area_id == area_id)
    return _retire(session, area, area.site_id, touching, [(Fixture, Fixture.area_id == area_id)])


def retire_fixture(session: Session, fixture_id: int) -> Fixture:
    """Retire a fixture; a repeat answers the fixture unchanged."""
    fixture = get_or_404(session, Fixture, fixture_id, "fixture")
    touching = ("The fixture", WorkOrderLine.fixture_id == fixture_id)
    return _retire(session, fixture, fixture.site_id, touching)


def retire_lamp_type(session: Session, lamp_type_id: int) -> LampType:
    """Retire a lamp type (no new fixtures or orders use it); a repeat answers it unchanged.

    Refused (409) while an open work order still has lines fitting this type.
    """
    lt = get_lamp_type(session, lamp_type_id)
    if lt.retired_at is not None:
        return lt
    refuse_if_open_orders(
        f"Lamp type '{lt.code}'",
        open_orders_touching(session, WorkOrderLine.lamp_type_id == lamp_type_id),
    )
    lt.retired_at = utcnow()
    session.flush()
    return lt
