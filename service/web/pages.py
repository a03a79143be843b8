"""The page renderer shared by every page module: templates, a render call, a redirect."""

from __future__ import annotations

from pathlib import Path
from typing import Any

from fastapi import Request
from fastapi.responses import HTMLResponse, RedirectResponse
from fastapi.staticfiles import StaticFiles
from fastapi.templating import Jinja2Templates

HERE = Path(__file__).parent
templates = Jinja2Templates(directory=str(HERE / "templates"))  # autoescapes .html
templates.env.globals["zip"] = zip  # pairs a line's position ids with their numbers
static = StaticFiles(directory=str(HERE / "static"))


def page(request: Request, name: str, status_code: int = 200, **context: Any) -> HTMLResponse:
    """Render a template with the request and the visitor, if any."""
    return templates.TemplateResponse(request, name, context, status_code=status_code)


def see_other(url: str) -> RedirectResponse:
    """A redirect after a POST (303 so the browser follows with GET)."""
    return RedirectResponse(url, status_code=303)
