"""api/resource_routes: a built route looks to FastAPI like the hand-written one it replaces."""

from __future__ import annotations

import inspect
from typing import Any

import pytest
from fastapi import APIRouter
from fastapi.routing import APIRoute

from service.api.resource_routes import Resource
from service.register import sites
from service.register.models import Site
from service.register.schemas import SiteRead, SiteUpdate

SITE = Resource(collection="/sites", id_name="site_id", model=Site, read=SiteRead, service=sites)


def _route(router: APIRouter, name: str) -> APIRoute:
    return next(r for r in router.routes if isinstance(r, APIRoute) and r.name == name)


def test_patch_route_has_the_hand_written_name_path_parameters_and_doc() -> None:
    router = APIRouter()
    SITE.patch_route(router, "update_site", "Change some fields of a site.", SiteUpdate)
    route = _route(router, "update_site")
    assert route.path == "/sites/{site_id}"
    assert route.methods == {"PATCH"}
    assert route.response_model is SiteRead
    assert list(inspect.signature(route.endpoint).parameters) == ["site_id", "body", "session", "_"]
    assert route.endpoint.__doc__ == "Change some fields of a site."
    # the ETag / If-Match dependency is wired like versioned(Site, "site_id")
    assert [d.dependency.versioned_model for d in route.dependencies] == [Site]


def test_service_function_is_looked_up_per_request(monkeypatch: pytest.MonkeyPatch) -> None:
    router = APIRouter()
    SITE.get_route(router, "get_site", "Read one site.")
    endpoint = _route(router, "get_site").endpoint
    calls: list[int] = []

    def fake_get_site(session: object, site_id: int) -> Any:
        calls.append(site_id)
        raise LookupError("stop")

    monkeypatch.setattr(sites, "get_site", fake_get_site)
    with pytest.raises(LookupError):
        endpoint(site_id=7, session=None, _=None)
    assert calls == [7]


def test_delete_route_answers_204_without_a_response_model() -> None:
    router = APIRouter()
    SITE.delete_route(router, "delete_site", "Delete a site and everything in it.")
    route = _route(router, "delete_site")
    assert route.status_code == 204
    assert route.response_model is None
