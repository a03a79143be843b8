"""HTTP routes for areas."""

from __future__ import annotations

from typing import Annotated

from fastapi import APIRouter, Query

from service.api.ids import MAX_ID
from service.api.resource_routes import Resource
from service.catalogue.schemas import IncludeRetiredQ
from service.register import areas
from service.register import repository as repo
from service.register.models import ACCESS_METHODS, Area
from service.register.schemas import AreaCreate, AreaRead, AreaUpdate, NameQ

router = APIRouter(tags=["register"])
AREA = Resource(collection="/areas", id_name="area_id", model=Area, read=AreaRead, service=areas)

AREA.list_route(
    router,
    "list_areas",
    "List areas, filtered and sorted (sort: name, id, site_id, access_method, created_at).",
    {
        "site_id": Annotated[
            int | None, Query(ge=1, le=MAX_ID, description="Only areas of this site.")
        ],
        "access_method": Annotated[
            str | None, Query(description=f"One of {', '.join(ACCESS_METHODS)}.")
        ],
        "name": NameQ,
        "include_retired": (IncludeRetiredQ, False),
    },
    (repo.area_query, repo.AREA_SORT),
)
AREA.create_route(
    router,
    ("create_area", "get_area"),
    "Create an area in a site.",
    AreaCreate,
)
AREA.get_route(router, "get_area", "Read one area.")
AREA.patch_route(router, "update_area", "Change some fields of an area.", AreaUpdate)
AREA.delete_route(router, "delete_area", "Delete an area with its fixtures.")
