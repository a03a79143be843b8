"""HTTP routes for the asset register: sites here, areas and fixtures in their own modules."""

from __future__ import annotations

from typing import Annotated

from fastapi import APIRouter, Query

from service.api.lookups import ExternalReferenceQ
from service.api.resource_routes import Resource
from service.catalogue.schemas import IncludeRetiredQ
from service.register import area_router, fixture_router, lamp_type_router, sites
from service.register import repository as repo
from service.register.models import Site
from service.register.schemas import NameQ, SiteCreate, SiteRead, SiteUpdate

router = APIRouter(tags=["register"])
SITE = Resource(collection="/sites", id_name="site_id", model=Site, read=SiteRead, service=sites)

SITE.list_route(
    router,
    "list_sites",
    "List sites, filtered and sorted (sort: name, id, created_at, nominal_voltage_v).",
    {
        "name": NameQ,
        "time_zone": Annotated[str | None, Query(description="Exact IANA time zone.")],
        "include_retired": (IncludeRetiredQ, False),
        "external_reference": ExternalReferenceQ,
    },
    (repo.site_query, repo.SITE_SORT),
)
SITE.create_route(router, ("create_site", "get_site"), "Create a site.", SiteCreate)
SITE.get_route(router, "get_site", "Read one site.")
SITE.patch_route(
    router,
    "update_site",
    "Change some fields of a site.",
    SiteUpdate,
)
SITE.delete_route(router, "delete_site", "Delete a site and everything in it.")

# One router for the whole register (service.register.router.router).
router.include_router(area_router.router)
router.include_router(fixture_router.router)
router.include_router(lamp_type_router.router)
