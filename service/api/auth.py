"""Bearer API keys and scopes, enforced on every route but the probes."""

from __future__ import annotations

from collections.abc import Callable
from contextlib import nullcontext
from typing import Annotated

from fastapi import Depends, Request
from sqlalchemy.orm import Session

from service.api.errors import Forbidden, Unauthorized
from service.db.session import get_session
from service.keys import service as keys
from service.keys.cache import ActiveKey

SessionDep = Annotated[Session, Depends(get_session, scope="function")]


def _bearer(request: Request) -> str:
    header = request.headers.get("authorization", "")
    scheme, _, token = header.partition(" ")
    if scheme.lower() != "bearer" or not token.strip():
        raise Unauthorized("Send an API key as 'Authorization: Bearer <key>'.")
    return token.strip()


def require(scope: str) -> Callable[..., ActiveKey]:
    """Dependency factory: the caller's key must hold `scope` (read < write < admin).

    The key comes from the key cache (the gate has just put it there), else from one read
    in the route's own session: no second connection, no second lookup per request.
    """

    def check(request: Request, session: SessionDep) -> ActiveKey:
        key = keys.active_key(lambda: nullcontext(session), _bearer(request))
        if key is None:
            raise Unauthorized("The API key is unknown or revoked.")
        if not keys.scope_allows(key.scope, scope):
            raise Forbidden(f"This route needs the '{scope}' scope; the key has '{key.scope}'.")
        return key

    check.required_scope = scope  # type: ignore[attr-defined]  # read by service.api.openapi
    return check


ReadKey = Annotated[ActiveKey, Depends(require("read"))]
WriteKey = Annotated[ActiveKey, Depends(require("write"))]
AdminKey = Annotated[ActiveKey, Depends(require("admin"))]
