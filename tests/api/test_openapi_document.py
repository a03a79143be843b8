"""The OpenAPI document: valid, secured, every error as problem+json, docs served offline."""

from __future__ import annotations

import re
from html.parser import HTMLParser
from typing import Any

import pytest
from fastapi import FastAPI
from fastapi.testclient import TestClient
from openapi_spec_validator import validate

from service.api.errors import PROBLEM_MEDIA_TYPE

METHODS = ("get", "post", "put", "patch", "delete")


def operations(doc: dict[str, Any]) -> list[tuple[str, str, dict[str, Any]]]:
    """(path, method, operation) of every /api/v1 operation."""
    return [
        (path, method, op)
        for path, item in doc["paths"].items()
        if path.startswith("/api/v1/")
        for method, op in item.items()
        if method in METHODS
    ]


@pytest.fixture(scope="module")
def doc(app: FastAPI) -> dict[str, Any]:
    """The document as a client downloads it."""
    with TestClient(app) as c:
        return dict(c.get("/openapi.json").json())


def test_document_is_valid_openapi(doc: dict[str, Any]) -> None:
    # openapi-spec-validator checks the whole document against the OpenAPI 3.1 schema.
    validate(doc)
    assert len(operations(doc)) >= 50


def test_every_operation_needs_the_bearer_key(doc: dict[str, Any]) -> None:
    scheme = doc["components"]["securitySchemes"]["apiKey"]
    assert scheme == {**scheme, "type": "http", "scheme": "bearer"}
    for path, method, op in operations(doc):
        assert op["security"] == [{"apiKey": []}], (method, path)


def test_every_error_is_problem_json_with_the_shared_schema(doc: dict[str, Any]) -> None:
    for path, method, op in operations(doc):
        for code in ("400", "401", "422", "503"):
            assert code in op["responses"], (method, path, code)
        for code, answer in op["responses"].items():
            if int(code) < 400:
                continue
            assert list(answer["content"]) == [PROBLEM_MEDIA_TYPE], (method, path, code)
            schema = answer["content"][PROBLEM_MEDIA_TYPE]["schema"]
            assert schema == {"$ref": "#/components/schemas/Problem"}, (method, path, code)
    # FastAPI's own 422 body (HTTPValidationError) is never sent: it is not documented.
    assert "HTTPValidationError" not in doc["components"]["schemas"]
    assert doc["components"]["schemas"]["Problem"]["required"] == [
        "type",
        "title",
        "status",
        "detail",
    ]


def responses(doc: dict[str, Any], method: str, path: str) -> set[str]:
    """The documented statuses of one operation."""
    return set(doc["paths"][path][method]["responses"])


def test_statuses_follow_from_how_routes_are_built(doc: dict[str, Any]) -> None:
    # A read of a list: no path id, read scope (the lowest), no body.
    assert responses(doc, "get", "/api/v1/sites") == {"200", "400", "401", "422", "503"}
    # A versioned read: 404 for the id, 304 for If-None-Match, no 412 (reads never fail it).
    assert responses(doc, "get", "/api/v1/sites/{site_id}") == {
        "200",
        "304",
        "400",
        "401",
        "404",
        "422",
        "503",
    }
    # A versioned write: scope (403), clash (409), If-Match (412), body limit (413).
    patch = responses(doc, "patch", "/api/v1/sites/{site_id}")
    assert {"403", "404", "409", "412", "413"} <= patch
    assert "415" not in patch
    # A raw upload: media type (415) and the row limit (413).
    assert {"403", "409", "413", "415"} <= responses(doc, "post", "/api/v1/fixtures/import")
    # A create whose body names another record (site_id): 404 for a missing one.
    assert "404" in responses(doc, "post", "/api/v1/areas")
    # Admin routes answer 403 to a lower key.
    assert "403" in responses(doc, "get", "/api/v1/keys")


def test_operation_ids_are_the_route_names_and_unique(doc: dict[str, Any]) -> None:
    ids = [op["operationId"] for _, _, op in operations(doc)]
    assert len(ids) == len(set(ids))
    assert doc["paths"]["/api/v1/sites"]["get"]["operationId"] == "list_sites"
    assert doc["paths"]["/api/v1/work-orders/{order_id}/issue"]["post"]["operationId"] == (
        "issue_order"
    )
    assert all(re.fullmatch(r"[a-z][a-z0-9_]*", i) for i in ids)


class _Refs(HTMLParser):
    """Collects every src/href of a page."""

    def __init__(self) -> None:
        super().__init__()
        self.urls: list[str] = []

    def handle_starttag(self, tag: str, attrs: list[tuple[str, str | None]]) -> None:
        self.urls += [v for k, v in attrs if k in ("src", "href", "spec-url") and v]


@pytest.mark.parametrize("page", ["/docs", "/redoc"])
def test_docs_reference_only_local_assets(client: TestClient, page: str) -> None:
    html = client.get(page)
    assert html.status_code == 200
    parser = _Refs()
    parser.feed(html.text)
    # The openapi url is written into the page's script, not an attribute.
    urls = parser.urls + re.findall(r"""url:\s*['"]([^'"]+)['"]""", html.text)
    assert len(urls) >= 3  # stylesheet or script, icon, the document
    assert not re.search(r"https?://|//[a-z]", html.text, re.IGNORECASE)  # no CDN, no fonts
    for url in urls:
        assert url.startswith("/"), url
        asset = client.get(url)
        assert asset.status_code == 200, url
        assert len(asset.content) > 100, url
    scripts = [u for u in urls if u.endswith(".js")]
    assert scripts  # the UI itself, served from the installed package


def test_swagger_ui_can_authorise(client: TestClient) -> None:
    # persistAuthorization keeps the key across reloads; the scheme makes the button appear.
    page = client.get("/docs").text
    assert '"persistAuthorization": true' in page
    # No validator badge: Swagger UI would otherwise fetch it from validator.swagger.io.
    assert '"validatorUrl": null' in page


def test_csv_is_declared_where_it_is_served_or_taken(doc: dict[str, Any]) -> None:
    def ok_media(path: str, method: str = "get") -> set[str]:
        return set(doc["paths"][path][method]["responses"]["200"]["content"])

    assert ok_media("/api/v1/fixtures/export") == {"text/csv", "application/json"}
    assert ok_media("/api/v1/lamp-types/export") == {"text/csv", "application/json"}
    assert ok_media("/api/v1/work-orders/{order_id}/lines.csv") == {"text/csv"}
    upload = doc["paths"]["/api/v1/fixtures/import"]["post"]["requestBody"]["content"]
    assert "text/csv" in upload


def test_main_request_bodies_carry_examples(doc: dict[str, Any]) -> None:
    schemas = doc["components"]["schemas"]
    for name in ("SiteCreate", "FixtureCreate", "WorkOrderCreate"):
        (example,) = schemas[name]["examples"]
        # Every example field is a field of the schema (extra fields are refused).
        assert set(example) <= set(schemas[name]["properties"]), name
