"""HTTP routes for the asset register: sites here, areas and fixtures in their own modules."""

from __future__ import annotations

from typing import Annotated

from fastapi import APIRouter, Query, Request, Response, status

from service.api.auth import ReadKey, SessionDep, WriteKey
from service.api.ids import IdPath
from service.api.lookups import ExternalReferenceQ
from service.api.pagination import Page, PageDep, page_of, paginate
from service.api.preconditions import locate, versioned
from service.catalogue.schemas import IncludeRetiredQ
from service.register import area_router, fixture_router, lamp_type_router, sites
from service.register import repository as repo
from service.register.models import Site
from service.register.schemas import SiteCreate, SiteRead, SiteUpdate

router = APIRouter(tags=["register"])


@router.get("/sites", response_model=Page[SiteRead])
def list_sites(
    session: SessionDep,
    _: ReadKey,
    page: PageDep,
    name: Annotated[str | None, Query(description="Name contains (any case).")] = None,
    time_zone: Annotated[str | None, Query(description="Exact IANA time zone.")] = None,
    include_retired: IncludeRetiredQ = False,
    external_reference: ExternalReferenceQ = None,
) -> Page[SiteRead]:
    """List sites, filtered and sorted (sort: name, id, created_at, nominal_voltage_v)."""
    stmt = repo.site_query(name, time_zone, include_retired, external_reference)
    rows, total = paginate(session, stmt, page, repo.SITE_SORT, Site.id)
    return page_of(SiteRead, rows, total, page)


@router.post("/sites", response_model=SiteRead, status_code=status.HTTP_201_CREATED)
def create_site(
    body: SiteCreate, session: SessionDep, _: WriteKey, request: Request, response: Response
) -> SiteRead:
    """Create a site."""
    site = sites.create_site(session, body)
    locate(request, response, "get_site", site_id=site.id)
    return SiteRead.model_validate(site)


@router.get("/sites/{site_id}", response_model=SiteRead, dependencies=[versioned(Site, "site_id")])
def get_site(site_id: IdPath, session: SessionDep, _: ReadKey) -> SiteRead:
    """Read one site."""
    return SiteRead.model_validate(sites.get_site(session, site_id))


@router.patch(
    "/sites/{site_id}", response_model=SiteRead, dependencies=[versioned(Site, "site_id")]
)
def update_site(site_id: IdPath, body: SiteUpdate, session: SessionDep, _: WriteKey) -> SiteRead:
    """Change some fields of a site."""
    return SiteRead.model_validate(sites.update_site(session, site_id, body))


@router.delete(
    "/sites/{site_id}",
    status_code=status.HTTP_204_NO_CONTENT,
    dependencies=[versioned(Site, "site_id")],
)
def delete_site(site_id: IdPath, session: SessionDep, _: WriteKey) -> Response:
    """Delete a site and everything in it."""
    sites.delete_site(session, site_id)
    return Response(status_code=status.HTTP_204_NO_CONTENT)


# One router for the whole register (service.register.router.router).
router.include_router(area_router.router)
router.include_router(fixture_router.router)
router.include_router(lamp_type_router.router)
