"""HTTP route deleting a lamp type: here because only the register knows which fixtures use it."""

from __future__ import annotations

from fastapi import APIRouter, Response, status

from service.api.auth import SessionDep, WriteKey
from service.api.ids import IdPath
from service.api.preconditions import versioned
from service.catalogue import service as catalogue
from service.catalogue.models import LampType
from service.register import repository as repo

router = APIRouter(prefix="/lamp-types", tags=["lamp catalogue"])


@router.delete(
    "/{lamp_type_id}",
    status_code=status.HTTP_204_NO_CONTENT,
    dependencies=[versioned(LampType, "lamp_type_id")],
)
def delete_lamp_type(lamp_type_id: IdPath, session: SessionDep, _: WriteKey) -> Response:
    """Delete a lamp type that no fixture uses."""
    fixtures = repo.fixtures_using_lamp_type(session, lamp_type_id)
    catalogue.delete_lamp_type(session, lamp_type_id, fixtures=fixtures)
    return Response(status_code=status.HTTP_204_NO_CONTENT)
