"""Mount the pages on the app: routes, static files, sign-in redirects and 403 pages."""

from __future__ import annotations

from urllib.parse import quote

from fastapi import FastAPI, Request
from fastapi.responses import RedirectResponse, Response

from service.web import fixture_pages, run_pages
from service.web.auth import NeedsSignIn, PageForbidden
from service.web.pages import page, static
from service.web.router import router


def install_web(app: FastAPI) -> None:
    """Add the page routes and their error handlers to the app."""
    app.include_router(router)
    app.include_router(fixture_pages.router)
    app.include_router(run_pages.router)
    app.mount("/static", static, name="static")

    async def to_sign_in(request: Request, exc: Exception) -> Response:
        target = request.url.path + (f"?{request.url.query}" if request.url.query else "")
        return RedirectResponse(f"/sign-in?next={quote(target, safe='')}", status_code=303)

    async def forbidden(request: Request, exc: Exception) -> Response:
        message = exc.message if isinstance(exc, PageForbidden) else "Forbidden."
        return page(request, "message.html", 403, title="Not allowed", message=message)

    app.add_exception_handler(NeedsSignIn, to_sign_in)
    app.add_exception_handler(PageForbidden, forbidden)
