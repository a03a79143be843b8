"""HTTP routes for relamp plans (read only; what-if overrides store nothing)."""

from __future__ import annotations

from collections.abc import Callable
from datetime import timedelta

from fastapi import APIRouter, Response
from sqlalchemy.orm import Session

from service.api.auth import ReadKey, SessionDep
from service.planning import service
from service.planning.catch_up import Committed
from service.planning.choice_bodies import plan_briefs
from service.planning.plan_bodies import area_plan_read, area_plan_reads, catch_up_read
from service.planning.schemas import AreaPlanRead, PlanOverrides, SitePlanRead
from service.planning.site_schedule import site_schedule
from service.register.models import Site
from service.register.sites import get_site

# A site's group orders still open (work orders' committed_orders): load the catch-up
# schedule counts before placing any area, as the weekly run does.
CommittedOrders = Callable[[Session, Site, str | None], list[Committed]]


def build_router(
    last_relamps: service.LastRelamps, committed: CommittedOrders | None = None
) -> APIRouter:
    """The planning routes, handed the work-order queries they need (completed group
    relamps; open group orders that take capacity)."""
    router = APIRouter(tags=["planning"])

    @router.get("/areas/{area_id}/relamp-plan", response_model=AreaPlanRead)
    def get_area_plan(area_id: int, session: SessionDep, _: ReadKey) -> AreaPlanRead:
        """An area's group relamp plan: interval, due date, cost rates, binding reason, inputs."""
        plan = service.area_plan(session, area_id, last_relamps=last_relamps)
        body = area_plan_read(plan)
        body.lamp_choice = plan_briefs(session, plan)  # the best option per lamp type
        return body

    @router.post("/areas/{area_id}/relamp-plan", response_model=AreaPlanRead)
    def what_if_area_plan(
        area_id: int, body: PlanOverrides, session: SessionDep, _: ReadKey
    ) -> AreaPlanRead:
        """The plan with what-if overrides (prices, labour, voltage, caps); nothing is stored."""
        plan = service.area_plan(session, area_id, body, last_relamps=last_relamps)
        return area_plan_read(plan)

    @router.get("/sites/{site_id}/relamp-plan", response_model=SitePlanRead)
    def get_site_plan(site_id: int, session: SessionDep, _: ReadKey) -> Response:
        """Every area of a site by due date, with its catch-up week (areas due in look-ahead)."""
        site = get_site(session, site_id)
        plans = service.site_plans(session, site, last_relamps=last_relamps)
        as_of = plans[0].as_of if plans else service.utcnow()
        today = service.local_today(site, as_of)
        horizon = today + timedelta(weeks=site.lookahead_weeks)
        # Every open group order counts (None: no week of its own is being run here).
        load = committed(session, site, None) if committed is not None else []
        sched = site_schedule(site, plans, today, horizon, load)
        areas = area_plan_reads(plans)  # alike groups' views computed once
        for body in areas:
            body.catch_up = catch_up_read(body.area_id, sched)
        read = SitePlanRead(
            site_id=site.id,
            time_zone=site.time_zone,
            as_of=as_of,
            weekly_labour_h_capacity=site.weekly_labour_h_capacity,
            weekly_budget_capacity=site.weekly_budget_capacity,
            areas=areas,
        )
        # The body is built validated already: dump it as FastAPI's response field would
        # (pydantic's JSON, by alias) without validating the whole site again.
        return Response(read.model_dump_json(by_alias=True), media_type="application/json")

    return router
