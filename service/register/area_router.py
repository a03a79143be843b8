"""HTTP routes for areas."""

from __future__ import annotations

from typing import Annotated

from fastapi import APIRouter, Query, Request, Response, status

from service.api.auth import ReadKey, SessionDep, WriteKey
from service.api.ids import MAX_ID, IdPath
from service.api.pagination import Page, PageDep, page_of, paginate
from service.api.preconditions import locate, versioned
from service.catalogue.schemas import IncludeRetiredQ
from service.register import areas
from service.register import repository as repo
from service.register.models import ACCESS_METHODS, Area
from service.register.schemas import AreaCreate, AreaRead, AreaUpdate

router = APIRouter(prefix="/areas", tags=["register"])


@router.get("", response_model=Page[AreaRead])
def list_areas(
    session: SessionDep,
    _: ReadKey,
    page: PageDep,
    site_id: Annotated[
        int | None, Query(ge=1, le=MAX_ID, description="Only areas of this site.")
    ] = None,
    access_method: Annotated[
        str | None, Query(description=f"One of {', '.join(ACCESS_METHODS)}.")
    ] = None,
    name: Annotated[str | None, Query(description="Name contains (any case).")] = None,
    include_retired: IncludeRetiredQ = False,
) -> Page[AreaRead]:
    """List areas, filtered and sorted (sort: name, id, site_id, access_method, created_at)."""
    stmt = repo.area_query(site_id, access_method, name, include_retired)
    rows, total = paginate(session, stmt, page, repo.AREA_SORT, Area.id)
    return page_of(AreaRead, rows, total, page)


@router.post("", response_model=AreaRead, status_code=status.HTTP_201_CREATED)
def create_area(
    body: AreaCreate, session: SessionDep, _: WriteKey, request: Request, response: Response
) -> AreaRead:
    """Create an area in a site."""
    area = areas.create_area(session, body)
    locate(request, response, "get_area", area_id=area.id)
    return AreaRead.model_validate(area)


@router.get("/{area_id}", response_model=AreaRead, dependencies=[versioned(Area, "area_id")])
def get_area(area_id: IdPath, session: SessionDep, _: ReadKey) -> AreaRead:
    """Read one area."""
    return AreaRead.model_validate(areas.get_area(session, area_id))


@router.patch("/{area_id}", response_model=AreaRead, dependencies=[versioned(Area, "area_id")])
def update_area(area_id: IdPath, body: AreaUpdate, session: SessionDep, _: WriteKey) -> AreaRead:
    """Change some fields of an area."""
    return AreaRead.model_validate(areas.update_area(session, area_id, body))


@router.delete(
    "/{area_id}", status_code=status.HTTP_204_NO_CONTENT, dependencies=[versioned(Area, "area_id")]
)
def delete_area(area_id: IdPath, session: SessionDep, _: WriteKey) -> Response:
    """Delete an area with its fixtures."""
    areas.delete_area(session, area_id)
    return Response(status_code=status.HTTP_204_NO_CONTENT)
