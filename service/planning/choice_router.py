"""HTTP routes for lamp choice: an area's comparison and the retrofit options it draws on."""

from __future__ import annotations

from typing import Annotated

from fastapi import APIRouter, Query, Request, Response, status

from service.api.auth import ReadKey, SessionDep, WriteKey
from service.api.ids import IdPath, IdQuery
from service.api.preconditions import locate, versioned
from service.catalogue.models import RetrofitOption
from service.catalogue.schemas import IncludeRetiredQ
from service.planning import retrofit, service
from service.planning.choice_bodies import LampChoiceRead, lamp_choice_read
from service.planning.lamp_choice import DEFAULT_HORIZON_YEARS
from service.planning.retrofit import RetrofitOptionCreate, RetrofitOptionRead

HorizonQ = Annotated[
    int, Query(ge=1, le=30, description="Years of the life-cycle comparison (default 10).")
]
CleaningQ = Annotated[
    float, Query(ge=0, le=240, description="Fixture cleaning at each group relamp, minutes.")
]


def build_router(last_relamps: service.LastRelamps) -> APIRouter:
    """The lamp-choice routes, handed the query for completed group relamps (work orders)."""
    router = APIRouter(tags=["lamp choice"])

    @router.get("/areas/{area_id}/lamp-choice", response_model=LampChoiceRead)
    def get_lamp_choice(
        area_id: IdPath,
        session: SessionDep,
        _: ReadKey,
        horizon_years: HorizonQ = DEFAULT_HORIZON_YEARS,
        cleaning_minutes_per_fixture: CleaningQ = 0.0,
    ) -> LampChoiceRead:
        """Options at the area's next group relamp: life-cycle cost, payback, IRR, CO2, light."""
        plan = service.area_plan(session, area_id, last_relamps=last_relamps)
        return lamp_choice_read(session, plan, horizon_years, cleaning_minutes_per_fixture)

    @router.get("/retrofit-options", response_model=list[RetrofitOptionRead])
    def list_retrofit_options(
        session: SessionDep,
        _: ReadKey,
        lamp_type_id: IdQuery = None,
        area_id: IdQuery = None,
        include_retired: IncludeRetiredQ = False,
    ) -> list[RetrofitOptionRead]:
        """Retrofit options by id, for a lamp type or an area."""
        rows = retrofit.list_options(session, lamp_type_id, area_id, include_retired)
        return [RetrofitOptionRead.model_validate(r) for r in rows]

    @router.post(
        "/retrofit-options", response_model=RetrofitOptionRead, status_code=status.HTTP_201_CREATED
    )
    def create_retrofit_option(
        body: RetrofitOptionCreate,
        session: SessionDep,
        _: WriteKey,
        request: Request,
        response: Response,
    ) -> RetrofitOptionRead:
        """Offer an LED lamp or replacement luminaire for a lamp type or an area."""
        opt = retrofit.create_option(session, body)
        locate(request, response, "get_retrofit_option", option_id=opt.id)
        return RetrofitOptionRead.model_validate(opt)

    @router.get("/retrofit-options/{option_id}", response_model=RetrofitOptionRead)
    def get_retrofit_option(
        option_id: IdPath, session: SessionDep, _: ReadKey
    ) -> RetrofitOptionRead:
        """One retrofit option."""
        return RetrofitOptionRead.model_validate(retrofit.get_option(session, option_id))

    @router.delete(
        "/retrofit-options/{option_id}",
        status_code=status.HTTP_204_NO_CONTENT,
        dependencies=[versioned(RetrofitOption, "option_id")],
    )
    def delete_retrofit_option(option_id: IdPath, session: SessionDep, _: WriteKey) -> Response:
        """Delete an option no work order has named (one that has: retire it)."""
        retrofit.delete_option(session, option_id)
        return Response(status_code=status.HTTP_204_NO_CONTENT)

    @router.post(
        "/retrofit-options/{option_id}/retire",
        response_model=RetrofitOptionRead,
        dependencies=[versioned(RetrofitOption, "option_id")],
    )
    def retire_retrofit_option(
        option_id: IdPath, session: SessionDep, _: WriteKey
    ) -> RetrofitOptionRead:
        """Retire an option: kept for the orders that named it, offered no more."""
        return RetrofitOptionRead.model_validate(retrofit.retire_option(session, option_id))

    return router
