"""Rules for areas: the parts of a site relamped together."""

from __future__ import annotations

from sqlalchemy import null
from sqlalchemy.orm import Session

from service.api.errors import Conflict, Invalid, NotFound
from service.db.crud import apply_patch, get_or_404
from service.register import repository as repo
from service.register.history import check_area, delete_checked, refuse_retired
from service.register.models import Area, Site
from service.register.schemas import AreaCreate, AreaUpdate

# Columns a PATCH may change but not empty.
NOT_NULL = (
    "name",
    "access_method",
    "group_minutes_per_lamp",
    "spot_minutes_per_lamp",
    "equipment_hire_per_visit",
    "starts_per_day",
    "luminaire_type",
    "dirt_environment",
    "relamp_includes_cleaning",
    "cleaning_minutes_per_fixture",
)


def get_area(session: Session, area_id: int) -> Area:
    """An area by id (404 if missing)."""
    return get_or_404(session, Area, area_id, "area")


def _site_for(session: Session, site_id: int) -> Site:
    site = session.get(Site, site_id)
    if site is None:
        raise NotFound(
            f"site_id {site_id}: no such site.",
            errors=[{"field": "site_id", "in": "body", "message": "no such site"}],
            resource="site",
            id=site_id,
            field="site_id",
        )
    return site


def create_area(session: Session, body: AreaCreate) -> Area:
    """Add an area to a site; names are unique within the site."""
    refuse_retired("site", "site_id", _site_for(session, body.site_id))
    if repo.area_name_taken(session, body.site_id, body.name):
        raise Conflict(f"The site already has an area named '{body.name}'.", field="name")
    values = body.model_dump()
    if values["cleaning_interval_months"] is None:
        # The ORM would put the column default in for a None: NULL (only at relamps) is meant.
        values["cleaning_interval_months"] = null()
    area = Area(**values)
    session.add(area)
    session.flush()
    return area


def update_area(session: Session, area_id: int, body: AreaUpdate) -> Area:
    """Change the fields sent (the site of an area does not change)."""
    area = get_area(session, area_id)
    sent = body.model_dump(exclude_unset=True)
    name = sent.get("name")
    if name is not None and repo.area_name_taken(session, area.site_id, name, exclude_id=area_id):
        raise Conflict(f"The site already has an area named '{name}'.", field="name")
    hours = sent.get("hours_per_day", area.hours_per_day)
    days = sent.get("days_per_week", area.days_per_week)
    if (hours is None) != (days is None):
        field = "days_per_week" if days is None else "hours_per_day"
        raise Invalid(
            "Give hours_per_day and days_per_week together.",
            errors=[{"field": field, "in": "body", "message": "give both or neither"}],
        )
    for required in NOT_NULL:
        if required in sent and sent[required] is None:
            raise Invalid(
                f"{required} cannot be emptied.",
                errors=[{"field": required, "in": "body", "message": "cannot be null"}],
            )
    apply_patch(area, body)
    session.flush()
    return area


def delete_area(session: Session, area_id: int) -> None:
    """Delete an area without history (409 naming the history otherwise)."""
    delete_checked(session, get_area(session, area_id), "The area", check_area)
