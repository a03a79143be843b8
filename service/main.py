"""The FastAPI application: routers under /api/v1, problem+json errors, probes."""

from __future__ import annotations

from collections.abc import AsyncIterator
from contextlib import asynccontextmanager

from fastapi import APIRouter, Depends, FastAPI

from service import __version__
from service.api.errors import install_error_handlers
from service.api.gate import install_gate
from service.api.guard import check_request
from service.api.health import router as health_router
from service.api.home import router as home_router
from service.api.idempotency import install_retries
from service.api.key_routes import router as keys_router
from service.api.metrics import install_metrics
from service.api.observe import configure_logging, install_observe
from service.api.openapi import install_openapi, operation_id
from service.catalogue.router import router as catalogue_router
from service.changes.router import router as changes_router
from service.config import get_settings
from service.events.router import router as events_router
from service.forecasting.router import router as forecasting_router
from service.heap import freeze_startup
from service.planning.choice_router import build_router as build_choice_router
from service.planning.router import build_router as build_planning_router
from service.readings.router import router as readings_router
from service.register.router import router as register_router
from service.retirement.router import router as retirement_router
from service.scheduling.router import router as runs_router
from service.stock.router import build_router as build_stock_router
from service.web.install import install_web
from service.webhooks.metrics import register_feed_metrics
from service.webhooks.router import router as webhooks_router
from service.workorders.issue import committed_orders
from service.workorders.repository import last_group_relamps
from service.workorders.router import router as workorders_router

API_PREFIX = "/api/v1"

# Every domain router, in the order /docs shows them.
DOMAIN_ROUTERS: list[APIRouter] = [
    register_router,
    catalogue_router,
    keys_router,
    readings_router,
    events_router,
    forecasting_router,
    build_planning_router(last_group_relamps, committed_orders),
    build_choice_router(last_group_relamps),
    workorders_router,
    build_stock_router(last_group_relamps),
    retirement_router,
    runs_router,
    changes_router,
    webhooks_router,
]


@asynccontextmanager
async def lifespan(app: FastAPI) -> AsyncIterator[None]:
    """Start background work (the weekly scheduler) with the app, stop it after."""
    from service.scheduling.scheduler import start_scheduler

    freeze_startup()
    scheduler = start_scheduler() if app.state.start_scheduler else None
    try:
        yield
    finally:
        if scheduler is not None:
            scheduler.shutdown()


def create_app(*, start_scheduler: bool | None = None) -> FastAPI:
    """Build the application."""
    settings = get_settings()
    configure_logging(settings)
    app = FastAPI(
        title="LampKeeper",
        version=__version__,
        summary="Lamp inventory, failure and light-loss forecasts, group relamping.",
        description=(
            "Keeps a building portfolio's lamp register, predicts burnouts and light loss "
            "from survival curves scaled for each fixture's supply voltage and switching, "
            "plans group relamping and issues work orders. Send an API key as "
            "`Authorization: Bearer <key>`. Relamping work is hazardous: follow local codes "
            "and licensed practice."
        ),
        lifespan=lifespan,
        docs_url=None,  # served offline by install_openapi
        redoc_url=None,
        generate_unique_id_function=operation_id,
    )
    app.state.start_scheduler = (
        settings.scheduler_enabled if start_scheduler is None else start_scheduler
    )
    install_error_handlers(app)
    install_retries(app)
    install_gate(app)  # key check and body limit before all but the request id
    install_observe(app)  # added last, so it runs first: X-Request-ID, metrics, access log
    app.include_router(health_router)
    app.include_router(home_router)
    for router in DOMAIN_ROUTERS:
        app.include_router(router, prefix=API_PREFIX, dependencies=[Depends(check_request)])
    install_web(app)  # the pages for people (service/web)
    install_openapi(app)  # the document, /docs and /redoc (offline)
    install_metrics(app)  # GET /metrics (Prometheus)
    register_feed_metrics()  # feed lag and webhook outbox, read at scrape time
    return app
