"""One builder per route kind of a record resource, so every resource answers alike.

A domain router names its resource once (``Resource``: collection path, id parameter,
model, read schema, service module) and asks it for the routes it has:

- ``get_route``: GET ``/things/{thing_id}`` with ETag / 304 (``versioned``), 404 when missing;
- ``list_route``: GET ``/things`` with paging, sorting and the resource's filters;
- ``create_route``: POST ``/things`` answering 201 with ``Location`` of the new record;
- ``patch_route``: PATCH ``/things/{thing_id}``, If-Match checked (412), partial update;
- ``action_route``: POST ``/things/{thing_id}/<action>`` (retire, issue, ...), If-Match checked;
- ``delete_route``: DELETE ``/things/{thing_id}`` answering 204, If-Match checked.

Each built endpoint carries the name (the operationId), the docstring and the parameters
a hand-written one would: path id, body, session, key, in that order, so the OpenAPI
document is the one the hand-written routes gave.
"""

from __future__ import annotations

import inspect
from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass
from types import ModuleType
from typing import Any

from fastapi import APIRouter, Request, Response, status
from pydantic import BaseModel

from service.api.auth import ReadKey, SessionDep, WriteKey
from service.api.ids import IdPath
from service.api.pagination import Page, PageDep, paginate
from service.api.preconditions import locate, versioned

_KW = inspect.Parameter.KEYWORD_ONLY


def param(name: str, annotation: Any, default: Any = inspect.Parameter.empty) -> Any:
    """One keyword parameter of a built endpoint, as FastAPI reads it."""
    return inspect.Parameter(name, _KW, annotation=annotation, default=default)


def endpoint(
    name: str, doc: str, params: Sequence[inspect.Parameter], run: Callable[..., Any]
) -> Callable[..., Any]:
    """A route function named `name` taking `params` (as FastAPI reads them) and calling run."""

    def call(**values: Any) -> Any:
        return run(**values)

    call.__name__ = call.__qualname__ = name
    call.__doc__ = doc
    call.__signature__ = inspect.Signature(list(params))  # type: ignore[attr-defined]
    return call


@dataclass(frozen=True, kw_only=True)
class Resource:
    """A record kind served at ``collection`` and ``collection/{id_name}``.

    Each route calls a function of `service` named like the route (``get_site``), looked up
    when the request comes (so a test may replace it), unless the route is given its own.
    """

    collection: str
    id_name: str
    model: type[Any]
    read: type[BaseModel]
    #: Row to response body; the read schema's model_validate unless the resource says.
    shape: Callable[[Any], Any] | None = None
    service: ModuleType | None = None

    @property
    def item(self) -> str:
        return f"{self.collection}/{{{self.id_name}}}"

    def to_read(self, row: Any) -> Any:
        return self.shape(row) if self.shape is not None else self.read.model_validate(row)

    def _act(self, name: str, given: Callable[..., Any] | None) -> Callable[..., Any]:
        return given if given is not None else lambda *a: getattr(self.service, name)(*a)

    def _add(
        self,
        router: APIRouter,
        spec: tuple[str, str, str, str],
        takes: tuple[Any, type[BaseModel] | None],
        run: Callable[..., Any],
        **route: Any,
    ) -> None:
        """Add a route on one record: spec (method, path, name, doc), takes (key, body)."""
        method, path, name, doc = spec
        key, body = takes
        params = [param(self.id_name, IdPath)]
        if body is not None:
            params.append(param("body", body))
        params += [param("session", SessionDep), param("_", key)]
        if method != "DELETE":
            route["response_model"] = self.read
        router.add_api_route(
            path,
            endpoint(name, doc, params, run),
            methods=[method],
            dependencies=[versioned(self.model, self.id_name)],
            **route,
        )

    def get_route(
        self, router: APIRouter, name: str, doc: str, load: Callable[..., Any] | None = None
    ) -> None:
        """GET one record (ETag, 304 on If-None-Match, 404 when missing)."""
        act = self._act(name, load)

        def run(session: Any, _: Any, **values: Any) -> Any:
            return self.to_read(act(session, values[self.id_name]))

        self._add(router, ("GET", self.item, name, doc), (ReadKey, None), run)

    def _write_route(
        self,
        router: APIRouter,
        spec: tuple[str, str, str, str],
        body: type[BaseModel] | None,
        given: Callable[..., Any] | None,
    ) -> None:
        act = self._act(spec[2], given)

        def run(session: Any, _: Any, **values: Any) -> Any:
            args = (values["body"],) if body is not None else ()
            return self.to_read(act(session, values[self.id_name], *args))

        self._add(router, spec, (WriteKey, body), run)

    def patch_route(
        self,
        router: APIRouter,
        name: str,
        doc: str,
        body: type[BaseModel],
        update: Callable[..., Any] | None = None,
    ) -> None:
        """PATCH one record with a partial body (If-Match checked)."""
        self._write_route(router, ("PATCH", self.item, name, doc), body, update)

    def action_route(
        self,
        router: APIRouter,
        action: str,
        name: str,
        doc: str,
        act: Callable[..., Any] | None = None,
        body: type[BaseModel] | None = None,
    ) -> None:
        """POST ``{item}/{action}``: a state change of one record (If-Match checked)."""
        self._write_route(router, ("POST", f"{self.item}/{action}", name, doc), body, act)

    def delete_route(
        self, router: APIRouter, name: str, doc: str, delete: Callable[..., Any] | None = None
    ) -> None:
        """DELETE one record: 204 with no body (If-Match checked)."""
        act = self._act(name, delete)

        def run(session: Any, _: Any, **values: Any) -> Response:
            act(session, values[self.id_name])
            return Response(status_code=status.HTTP_204_NO_CONTENT)

        spec = ("DELETE", self.item, name, doc)
        self._add(router, spec, (WriteKey, None), run, status_code=status.HTTP_204_NO_CONTENT)

    def create_route(
        self,
        router: APIRouter,
        names: tuple[str, str],
        doc: str,
        body: type[BaseModel],
        create: Callable[..., Any] | None = None,
    ) -> None:
        """POST to the collection: 201 with the record and Location of its GET route.

        `names` is (this route's name, the GET route's name).
        """
        name, get_name = names
        act = self._act(name, create)
        params = [
            param("body", body),
            param("session", SessionDep),
            param("_", WriteKey),
            param("request", Request),
            param("response", Response),
        ]

        def run(body: Any, session: Any, request: Request, response: Response, **_: Any) -> Any:
            row = act(session, body)
            locate(request, response, get_name, **{self.id_name: row.id})
            return self.to_read(row)

        router.add_api_route(
            self.collection,
            endpoint(name, doc, params, run),
            methods=["POST"],
            response_model=self.read,
            status_code=status.HTTP_201_CREATED,
        )

    def list_route(
        self,
        router: APIRouter,
        name: str,
        doc: str,
        filters: Mapping[str, Any],
        query: tuple[Callable[..., Any], Mapping[str, Any]],
        load: Callable[..., tuple[Sequence[Any], int]] | None = None,
        plain: bool = False,
    ) -> None:
        """GET the collection: one page of the records matching `filters`, sorted.

        `filters` maps each query parameter to its annotation, or to (annotation, default)
        when the default is not None; `query` is (the statement for the filters, the sort
        columns); the statement's function takes the filters by their parameter names.
        `load` (session, statement, page) -> (rows, total) replaces the plain paginate;
        with `plain` its rows are already dicts of the read schema's fields, which the
        response model then validates once (not once here and again in FastAPI).
        """
        build, sort = query
        params = [param("session", SessionDep), param("_", ReadKey), param("page", PageDep)]
        for key, spec in filters.items():
            annotation, default = spec if isinstance(spec, tuple) else (spec, None)
            params.append(param(key, annotation, default))

        def run(session: Any, _: Any, page: Any, **values: Any) -> Any:
            stmt = build(**values)
            if load is not None:
                rows, total = load(session, stmt, page)
            else:
                rows, total = paginate(session, stmt, page, sort, self.model.id)
            if plain:
                return {
                    "items": rows,
                    "total": total,
                    "limit": page.limit,
                    "offset": page.offset,
                    "next_after": page.next_after,
                }
            return Page(
                items=[self.to_read(r) for r in rows],
                total=total,
                limit=page.limit,
                offset=page.offset,
                next_after=page.next_after,
            )

        router.add_api_route(
            self.collection,
            endpoint(name, doc, params, run),
            methods=["GET"],
            response_model=Page[self.read],  # type: ignore[name-defined]
        )
