"""HTTP routes for relamp plans (read only; what-if overrides store nothing)."""

from __future__ import annotations

from datetime import timedelta

from fastapi import APIRouter

from service.api.auth import ReadKey, SessionDep
from service.planning import service
from service.planning.choice_bodies import plan_briefs
from service.planning.plan_bodies import area_plan_read, catch_up_read
from service.planning.schemas import AreaPlanRead, PlanOverrides, SitePlanRead
from service.planning.site_schedule import site_schedule
from service.register.sites import get_site


def build_router(last_relamps: service.LastRelamps) -> APIRouter:
    """The planning routes, handed the query for completed group relamps (from work orders)."""
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
    def get_site_plan(site_id: int, session: SessionDep, _: ReadKey) -> SitePlanRead:
        """Every area of a site by due date, with its catch-up week (areas due in look-ahead)."""
        site = get_site(session, site_id)
        plans = service.site_plans(session, site, last_relamps=last_relamps)
        as_of = plans[0].as_of if plans else service.utcnow()
        today = service.local_today(site, as_of)
        horizon = today + timedelta(weeks=site.lookahead_weeks)
        sched = site_schedule(site, plans, today, horizon)
        areas = [area_plan_read(p) for p in plans]
        for body in areas:
            body.catch_up = catch_up_read(body.area_id, sched)
        return SitePlanRead(
            site_id=site.id,
            time_zone=site.time_zone,
            as_of=as_of,
            weekly_labour_h_capacity=site.weekly_labour_h_capacity,
            weekly_budget_capacity=site.weekly_budget_capacity,
            areas=areas,
        )

    return router
