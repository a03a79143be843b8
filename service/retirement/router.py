"""HTTP routes retiring records: POST .../{id}/retire for sites, areas, fixtures, lamp types."""

from __future__ import annotations

from fastapi import APIRouter

from service.api.auth import SessionDep, WriteKey
from service.api.ids import IdPath
from service.api.preconditions import versioned
from service.catalogue import service as catalogue
from service.catalogue.models import LampType
from service.catalogue.schemas import LampTypeRead
from service.register.models import Area, Fixture, Site
from service.register.schemas import AreaRead, FixtureRead, SiteRead
from service.retirement import service

router = APIRouter()


@router.post(
    "/sites/{site_id}/retire",
    response_model=SiteRead,
    tags=["register"],
    dependencies=[versioned(Site, "site_id")],
)
def retire_site(site_id: IdPath, session: SessionDep, _: WriteKey) -> SiteRead:
    """Retire a site with its areas and fixtures (kept with their history)."""
    return SiteRead.model_validate(service.retire_site(session, site_id))


@router.post(
    "/areas/{area_id}/retire",
    response_model=AreaRead,
    tags=["register"],
    dependencies=[versioned(Area, "area_id")],
)
def retire_area(area_id: IdPath, session: SessionDep, _: WriteKey) -> AreaRead:
    """Retire an area with its fixtures (kept with their history)."""
    return AreaRead.model_validate(service.retire_area(session, area_id))


@router.post(
    "/fixtures/{fixture_id}/retire",
    response_model=FixtureRead,
    tags=["register"],
    dependencies=[versioned(Fixture, "fixture_id")],
)
def retire_fixture(fixture_id: IdPath, session: SessionDep, _: WriteKey) -> FixtureRead:
    """Retire a fixture (kept with its history); refused while it is on an open order."""
    return FixtureRead.model_validate(service.retire_fixture(session, fixture_id))


@router.post(
    "/lamp-types/{lamp_type_id}/retire",
    response_model=LampTypeRead,
    tags=["lamp catalogue"],
    dependencies=[versioned(LampType, "lamp_type_id")],
)
def retire_lamp_type(lamp_type_id: IdPath, session: SessionDep, _: WriteKey) -> LampTypeRead:
    """Retire a lamp type: kept for past orders and field fits, hidden from lists."""
    return catalogue.to_read(service.retire_lamp_type(session, lamp_type_id))
