"""HTTP routes for API keys (admin scope): above api, while service.keys sits below it."""

from __future__ import annotations

from fastapi import APIRouter, Request, Response, status

from service.api.auth import AdminKey, SessionDep
from service.api.ids import IdPath
from service.keys import service
from service.keys.schemas import ApiKeyCreate, ApiKeyCreated, ApiKeyRead

router = APIRouter(prefix="/keys", tags=["api keys"])


@router.get("", response_model=list[ApiKeyRead])
def list_keys(session: SessionDep, _: AdminKey) -> list[ApiKeyRead]:
    """List API keys (never their secrets)."""
    return [ApiKeyRead.model_validate(k) for k in service.list_keys(session)]


@router.post("", response_model=ApiKeyCreated, status_code=status.HTTP_201_CREATED)
def create_key(
    body: ApiKeyCreate, session: SessionDep, _: AdminKey, request: Request, response: Response
) -> ApiKeyCreated:
    """Create a key; the secret is in this response only."""
    row, secret = service.create_key(session, body.name, body.scope)
    response.headers["Location"] = str(request.url_for("list_keys"))  # keys have no single GET
    return ApiKeyCreated(**ApiKeyRead.model_validate(row).model_dump(), key=secret)


@router.delete("/{key_id}", response_model=ApiKeyRead)
def revoke_key(key_id: IdPath, session: SessionDep, _: AdminKey) -> ApiKeyRead:
    """Revoke a key."""
    return ApiKeyRead.model_validate(service.revoke_key(session, key_id))
