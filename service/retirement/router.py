"""HTTP routes retiring records: POST .../{id}/retire for sites, areas, fixtures, lamp types."""

from __future__ import annotations

from fastapi import APIRouter

from service.catalogue.router import LAMP_TYPE
from service.register.area_router import AREA
from service.register.fixture_router import FIXTURE
from service.register.router import SITE
from service.retirement import service

router = APIRouter()
register = APIRouter(tags=["register"])
catalogue = APIRouter(tags=["lamp catalogue"])

SITE.action_route(
    register,
    "retire",
    "retire_site",
    "Retire a site with its areas and fixtures (kept with their history).",
    service.retire_site,
)
AREA.action_route(
    register,
    "retire",
    "retire_area",
    "Retire an area with its fixtures (kept with their history).",
    service.retire_area,
)
FIXTURE.action_route(
    register,
    "retire",
    "retire_fixture",
    "Retire a fixture (kept with its history); refused while it is on an open order.",
    service.retire_fixture,
)
LAMP_TYPE.action_route(
    catalogue,
    "retire",
    "retire_lamp_type",
    "Retire a lamp type: kept for past orders and field fits, hidden from lists.",
    service.retire_lamp_type,
)
router.include_router(register)
router.include_router(catalogue)
