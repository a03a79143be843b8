"""ETag / If-None-Match / If-Match on single resources, from each row's `version` column.

A router wires it with one argument: ``dependencies=[versioned(Site, "site_id")]``. The
dependency loads the row in the request's session (the route then gets the same object),
sets ``ETag: "<version>"`` on GET, answers 304 when If-None-Match matches, and 412 when an
If-Match on PATCH, DELETE or an action POST names another version. A model without a
``version`` attribute is skipped, so the wiring can stay in place before its column exists.
"""

from __future__ import annotations

from typing import Any

from fastapi import Depends, FastAPI, Request, Response
from sqlalchemy.orm.exc import StaleDataError

from service.api.auth import SessionDep
from service.api.errors import Conflict, DomainError, problem
from service.api.ids import MAX_ID

READ_METHODS = frozenset({"GET", "HEAD"})


class PreconditionFailed(DomainError):
    """An If-Match header names a version the record no longer has (412)."""

    status, title, kind = 412, "Precondition failed", "precondition-failed"


class NotModified(Exception):
    """The client's copy is current: answer 304 with the ETag and no body."""

    def __init__(self, etag: str) -> None:
        super().__init__(etag)
        self.etag = etag


def etag_of(version: int) -> str:
    """The strong entity tag for a record version."""
    return f'"{version}"'


def _tags(header: str) -> list[str]:
    """The entity tags listed in an If-Match / If-None-Match header (weak prefix dropped)."""
    return [t.strip().removeprefix("W/") for t in header.split(",") if t.strip()]


def check_preconditions(request: Request, response: Response, version: int) -> None:
    """Apply If-None-Match (reads) or If-Match (writes) against a current version."""
    tag = etag_of(version)
    if request.method in READ_METHODS:
        response.headers["ETag"] = tag
        wanted = request.headers.get("if-none-match")
        if wanted is not None and ("*" in _tags(wanted) or tag in _tags(wanted)):
            raise NotModified(tag)
        return
    wanted = request.headers.get("if-match")
    if wanted is not None and "*" not in _tags(wanted) and tag not in _tags(wanted):
        raise PreconditionFailed(
            f"If-Match names {wanted.strip()} but the record is now at version {tag}: "
            "read it again and resend the change.",
            field="If-Match",
            current_etag=tag,
        )


def versioned(model: type[Any], path_param: str) -> Any:
    """Route dependency: ETag / 304 / 412 for the `model` row named by `path_param`."""

    def check(request: Request, response: Response, session: SessionDep) -> None:
        if not hasattr(model, "version"):
            return
        raw = request.path_params.get(path_param)
        try:
            obj_id = int(raw) if raw is not None else 0
        except ValueError:
            return  # the route's own validation answers 422
        row = session.get(model, obj_id) if 1 <= obj_id <= MAX_ID else None
        if row is not None:  # a missing row is the route's 404
            check_preconditions(request, response, row.version)

    check.versioned_model = model  # type: ignore[attr-defined]  # read by service.api.openapi
    return Depends(check)


def install_precondition_handlers(app: FastAPI) -> None:
    """Render NotModified as a bare 304 and a lost update (StaleDataError) as a 409 problem."""

    @app.exception_handler(NotModified)
    async def _not_modified(request: Request, exc: NotModified) -> Response:
        return Response(status_code=304, headers={"ETag": exc.etag})

    @app.exception_handler(StaleDataError)
    async def _stale(request: Request, exc: StaleDataError) -> Response:
        err = Conflict("Another request changed this record at the same moment; read it again.")
        return problem(409, err.title, err.detail, kind="stale-version", instance=request.url.path)


def locate(request: Request, response: Response, route_name: str, **path_params: Any) -> None:
    """Set Location on a 201 answer: the URL of the named GET route (the created record)."""
    response.headers["Location"] = str(request.url_for(route_name, **path_params))
