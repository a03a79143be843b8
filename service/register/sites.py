"""Rules of the asset register. Services flush; the request's session commits."""

from __future__ import annotations

from sqlalchemy.orm import Session

from service.api.errors import Conflict
from service.api.lookups import refuse_taken_reference
from service.db.crud import apply_patch, get_or_404
from service.register import repository as repo
from service.register.history import check_site, delete_checked
from service.register.models import Site
from service.register.schemas import SiteCreate, SiteUpdate


def get_site(session: Session, site_id: int) -> Site:
    """A site by id (404 if missing)."""
    return get_or_404(session, Site, site_id, "site")


def create_site(session: Session, body: SiteCreate) -> Site:
    """Add a site; names are unique."""
    if repo.site_name_taken(session, body.name):
        raise Conflict(f"A site named '{body.name}' already exists.", field="name")
    refuse_taken_reference(session, Site, body.external_reference, "Site")
    site = Site(**body.model_dump())
    session.add(site)
    session.flush()
    return site


def update_site(session: Session, site_id: int, body: SiteUpdate) -> Site:
    """Change the fields sent."""
    site = get_site(session, site_id)
    if body.name is not None and repo.site_name_taken(session, body.name, exclude_id=site_id):
        raise Conflict(f"A site named '{body.name}' already exists.", field="name")
    refuse_taken_reference(session, Site, body.external_reference, "Site", exclude_id=site_id)
    apply_patch(site, body)
    session.flush()
    return site


def delete_site(session: Session, site_id: int) -> None:
    """Delete a site without history (409 naming the history otherwise)."""
    delete_checked(session, get_site(session, site_id), "The site", check_site)
