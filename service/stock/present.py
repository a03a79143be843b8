"""Shape the stock computations as response bodies (no arithmetic beyond rounding)."""

from __future__ import annotations

from sqlalchemy import select
from sqlalchemy.orm import Session

from service.catalogue.models import LampType
from service.planning.service import LastRelamps
from service.stock import forecast, ledger, service
from service.stock.schemas import (
    DemandLine,
    DemandRead,
    DemandWeek,
    OutlookRead,
    OutlookWeek,
    ToOrderLine,
)


def demand_read(session: Session, sd: forecast.StoreDemand) -> DemandRead:
    """A storeroom's weekly demand as a response."""
    codes = dict(
        session.execute(
            select(LampType.id, LampType.code).where(LampType.id.in_(list(sd.types)))
        ).all()
    )
    lines = []
    for t, td in sd.types.items():
        w = td.week
        weeks = [
            DemandWeek(
                week=i + 1,
                starts_on=sd.week_starts[i],
                spot_mean=round(float(w.spot_mean[i]), 4),
                spot_quantile=int(w.spot_quantile[i]),
                group=int(w.group[i]),
                breakage=round(float(w.breakage[i]), 4),
                total_mean=round(float(w.total_mean[i]), 4),
            )
            for i in range(len(sd.week_starts))
        ]
        lines.append(
            DemandLine(
                lamp_type_id=t,
                lamp_type_code=str(codes.get(t, t)),
                positions=td.positions,
                method=w.method,
                weeks=weeks,
            )
        )
    return DemandRead(
        storeroom_id=sd.storeroom_id,
        as_of=sd.as_of,
        horizon_weeks=sd.options.weeks,
        service_level=sd.options.level,
        breakage_fraction=sd.options.breakage,
        lines=lines,
    )


def _rows(
    session: Session, storeroom_id: int, last: LastRelamps, opt: forecast.Options
) -> tuple[forecast.StoreDemand, list[forecast.ToOrder]]:
    balances = service.balances(session, storeroom_id)
    sd = forecast.storeroom_demand(session, storeroom_id, last_relamps=last, options=opt)
    return sd, forecast.to_order(sd, balances, session)


def to_order_lines(
    session: Session, storeroom_id: int, last: LastRelamps, opt: forecast.Options
) -> list[ToOrderLine]:
    """Every stocked lamp type of a storeroom with its reorder figures."""
    _, rows = _rows(session, storeroom_id, last, opt)
    return [
        ToOrderLine(
            storeroom_id=storeroom_id,
            lamp_type_id=r.balance.lamp_type_id,
            lamp_type_code=r.code,
            on_hand=r.balance.on_hand,
            reserved=r.balance.reserved,
            available=r.balance.available,
            lead_time_weeks=r.balance.lead_time_weeks,
            lead_time_demand_mean=round(r.lead_time_mean, 3),
            reorder_point=r.decision.reorder_point,
            policy=r.balance.policy,
            order_quantity=r.decision.order_quantity,
            pack_size=r.balance.pack_size,
            unit_cost=r.unit_cost,
            order_value=round(r.decision.order_quantity * r.unit_cost, 2),
            annual_demand=round(r.annual_demand, 2),
            eoq=None if r.decision.eoq is None else round(r.decision.eoq, 2),
            next_group_week=None if r.next_group_week is None else r.next_group_week + 1,
        )
        for r in rows
    ]


def outlook_read(
    session: Session, storeroom_id: int, lamp_type_id: int, last: LastRelamps, opt: forecast.Options
) -> OutlookRead:
    """One stocked lamp type's week-by-week level."""
    ledger.get_balance(session, storeroom_id, lamp_type_id)  # 404 when not stocked
    sd, rows = _rows(session, storeroom_id, last, opt)
    row = next(r for r in rows if r.balance.lamp_type_id == lamp_type_id)
    lv = forecast.level_outlook(sd, row)
    return OutlookRead(
        storeroom_id=storeroom_id,
        lamp_type_id=lamp_type_id,
        start_available=row.balance.available,
        order_quantity=row.decision.order_quantity,
        weeks=[
            OutlookWeek(
                week=i + 1,
                starts_on=sd.week_starts[i],
                demand_mean=round(float(lv.demand_mean[i]), 4),
                received=int(lv.received[i]),
                level_mean=round(float(lv.level_mean[i]), 3),
                level_at_service_level=round(float(lv.level_at_service_level[i]), 3),
            )
            for i in range(len(sd.week_starts))
        ],
    )
