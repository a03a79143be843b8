"""Lamp choice for an area's next group relamp: load the options, call lamp_choice (no writes).

Per lamp type in the area's plan: the same type (its plan as the area plan computed it);
the type of the same catalogue family, same technology, rated nearest the measured voltage
(only when nearer than the current type's rating, or as near and at or above the supply
while the current one is below it; neither retired nor withdrawn at the due date); every retrofit option offered for the type or for the area. Retrofit costs are per
unit, a lamp position for an LED lamp and a fixture for a replacement luminaire: the kit, its
labour per unit (a spot call adds the area's spot minus group minutes per lamp: travel and
set-up of a single call), the area's equipment hire shared over the units; the removed
lamps' disposal and the rebate fall in year 0. The withdrawal date
applies when the lamp type names no market, the site none, or both the same one.
"""

from __future__ import annotations

import dataclasses
import math
from datetime import date
from types import SimpleNamespace

from sqlalchemy import event, func, or_, select
from sqlalchemy.orm import Session

from service.catalogue.lamp_model import LampModel, resolve_lamp_model
from service.catalogue.models import LampType, RetrofitOption
from service.planning.lamp_choice import (
    DEFAULT_HORIZON_YEARS,
    RATED_FOR_VOLTAGE,
    RETROFIT,
    SAME_TYPE,
    Comparison,
    Economics,
    Option,
    compare,
)
from service.planning.service import WEEKS_PER_YEAR, AreaPlan, TypeGroup, local_today
from service.register.models import Fixture, Site
from service.reliability.lumen import DEFAULT_EFFICACY_LM_PER_W, exponential_curve

L70 = 0.7


@dataclasses.dataclass(frozen=True)
class TypeChoice:
    """The comparison for one lamp type of an area."""

    group: TypeGroup
    comparison: Comparison


def withdrawal(lt: LampType, site: Site, on: date) -> str | None:
    """Why a lamp type cannot be bought at a site on a date, or None."""
    if lt.withdrawn_after is None or on < lt.withdrawn_after:
        return None
    market, here = lt.withdrawn_market, site.market
    if market and here and market.strip().lower() != here.strip().lower():
        return None
    where = f" in {market}" if market else ""
    return (
        f"lamp type {lt.code} is withdrawn from sale{where} after {lt.withdrawn_after.isoformat()}"
    )


def _sibling(session: Session, lt: LampType, site: Site, volts: float, on: date) -> LampType | None:
    """The same-family type rated nearest the measured voltage, if nearer than lt's rating."""
    if not lt.family:
        return None
    rows = session.scalars(
        select(LampType).where(
            LampType.family == lt.family,
            LampType.technology == lt.technology,
            LampType.id != lt.id,
            LampType.retired_at.is_(None),
        )
    ).all()
    fits = [r for r in rows if withdrawal(r, site, on) is None]
    if not fits:
        return None

    def key(rated_v: float) -> tuple[float, int]:
        # Nearest rating first; at equal distance one at or above the supply (over-voltage is
        # what shortens a lamp's life, so a 130 V lamp is the fix on a 125 V circuit).
        return (round(abs(rated_v - volts), 6), 0 if rated_v >= volts else 1)

    best = min(fits, key=lambda r: (key(r.rated_volts), r.id))
    return best if key(best.rated_volts) < key(lt.rated_volts) else None


def retrofit_model(opt: RetrofitOption, site: Site) -> LampModel:
    """An LED life model from a retrofit option: failures from B10, light through L70."""
    row = SimpleNamespace(
        id=None, code=opt.code, technology="led", rated_watts=opt.watts_per_unit,
        rated_volts=site.nominal_voltage_v, rated_life_h=opt.l70_h, rated_percentile=50.0,
        rated_hours_per_start=None, second_hours_per_start=None, second_cycle_life_h=None,
        weibull_shape=opt.failure_shape, mortality_points=None, lumen_points=None,
        lumen_basis="hours", initial_lumens=opt.lumens_per_unit, life_exponent=None,
        light_exponent=None, power_exponent=None, ballast_behaviour=None, driver_min_volts=None,
        driver_max_volts=None, failure_b10_h=opt.failure_b10_h or opt.l70_h, lm80_points=None,
        lm80_units=None, unit_price=opt.kit_cost_per_unit, contains_mercury=False,
        rupture_risk=False,
    )  # fmt: skip
    model = resolve_lamp_model(row)
    # Exponential lumen maintenance through L70 (the TM-21 form, B = 1).
    curve = exponential_curve(
        1.0, math.log(1.0 / L70) / opt.l70_h, source=f"exponential through L70 = {opt.l70_h:g} h"
    )
    return dataclasses.replace(model, lumen_curve=curve)


def _retrofit_option(
    g: TypeGroup, opt: RetrofitOption, site: Site, spot_extra_min: float, fixtures: int,
    cleaning: float,
) -> Option:  # fmt: skip
    c = g.costs
    units = g.positions if opt.kind == "led_lamp" else fixtures  # an LED lamp per position
    costs = dataclasses.replace(
        c,
        lamp_price=opt.kit_cost_per_unit,
        group_minutes_per_lamp=opt.labour_minutes_per_unit,
        spot_minutes_per_lamp=opt.labour_minutes_per_unit + spot_extra_min,
        area_positions=max(units, 1),
        disposal_fee_per_lamp=0.0,
        lamp_watts=opt.watts_per_unit,
    )
    cond = dataclasses.replace(g.cond, hours_per_start=None)
    kind = "LED lamp" if opt.kind == "led_lamp" else "replacement luminaire"
    return Option(
        kind=RETROFIT, label=f"{opt.code} ({kind})", model=retrofit_model(opt, site),
        costs=costs, cond=cond, units=units, fixtures=fixtures,
        cleaning_per_fixture_visit=cleaning,
        removal_disposal=g.positions * c.disposal_fee_per_lamp,
        rebate=units * opt.rebate_per_unit, retrofit_option_id=opt.id,
    )  # fmt: skip


def _options(session: Session, plan: AreaPlan, g: TypeGroup, cleaning_min: float) -> list[Option]:
    """Same type, the type rated for the measured voltage, and the retrofit options."""
    site, area = plan.site, plan.area
    on = g.due_on or local_today(site, plan.as_of)
    lt = session.get(LampType, g.lamp_type_id)
    assert lt is not None  # the plan read it
    fixtures = (
        session.scalar(
            select(func.count(Fixture.id)).where(
                Fixture.area_id == area.id,
                Fixture.lamp_type_id == lt.id,
                Fixture.retired_at.is_(None),
            )
        )
        or 1
    )
    cleaning = cleaning_min / 60.0 * g.costs.labour_rate_per_h  # per fixture per group visit
    out = [
        Option(
            kind=SAME_TYPE, label=f"{lt.code} (same lamp type)", model=g.model, costs=g.costs,
            cond=g.cond, units=g.positions, fixtures=fixtures, cleaning_per_fixture_visit=cleaning,
            withdrawn=withdrawal(lt, site, on), lamp_type_id=lt.id, plan=g.group,
        )
    ]  # fmt: skip
    sib = _sibling(session, lt, site, g.voltage_v, on)
    if sib is not None:
        model = resolve_lamp_model(sib)
        if not model.is_filament:  # the area's ballast, as the current type's plan uses it
            model = dataclasses.replace(
                model,
                ballast_behaviour=g.model.ballast_behaviour,
                ballast_gain=g.model.ballast_gain,
            )
        costs = dataclasses.replace(
            g.costs, lamp_price=model.unit_price, lamp_watts=model.rated_watts
        )
        out.append(
            Option(
                kind=RATED_FOR_VOLTAGE, label=f"{sib.code} (rated {sib.rated_volts:g} V)",
                model=model, costs=costs, cond=g.cond, units=g.positions, fixtures=fixtures,
                cleaning_per_fixture_visit=cleaning, lamp_type_id=sib.id,
            )
        )  # fmt: skip
    spot_extra = max(area.spot_minutes_per_lamp - area.group_minutes_per_lamp, 0.0)
    retrofits = session.scalars(
        select(RetrofitOption)
        .where(
            RetrofitOption.retired_at.is_(None),
            or_(RetrofitOption.lamp_type_id == lt.id, RetrofitOption.area_id == area.id),
        )
        .order_by(RetrofitOption.id)
    ).all()
    out += [_retrofit_option(g, r, site, spot_extra, fixtures, cleaning) for r in retrofits]
    return out


def economics(plan: AreaPlan, horizon_years: int = DEFAULT_HORIZON_YEARS) -> Economics:
    """The site's money terms and the area's yearly burn hours."""
    s = plan.site
    return Economics(
        discount_rate=float(s.discount_rate),
        escalation_rate=float(s.energy_escalation_rate),
        emission_factor_kg_per_kwh=s.emission_factor_kg_per_kwh,
        burn_hours_per_year=plan.weekly_burn_hours * WEEKS_PER_YEAR,
        horizon_years=horizon_years,
    )


def design_lumens(g: TypeGroup) -> float:
    """The light the area was laid out for: rated initial lumens x the type's positions."""
    m = g.model
    lm = (
        m.initial_lumens
        if m.initial_lumens
        else m.rated_watts * DEFAULT_EFFICACY_LM_PER_W[m.technology]
    )
    return lm * g.positions


def area_choice(
    session: Session,
    plan: AreaPlan,
    *,
    horizon_years: int = DEFAULT_HORIZON_YEARS,
    cleaning_minutes_per_fixture: float = 0.0,
    lamp_type_ids: set[int] | None = None,
) -> list[TypeChoice]:
    """The lamp choice of each lamp type in an area's plan (optionally only some types)."""
    if plan.weekly_burn_hours <= 0:
        return []
    eco = economics(plan, horizon_years)
    out = []
    for g in plan.groups:
        if lamp_type_ids is not None and g.lamp_type_id not in lamp_type_ids:
            continue
        opts = _options(session, plan, g, cleaning_minutes_per_fixture)
        out.append(TypeChoice(g, compare(opts, eco, design_lumens(g))))
    return out


@dataclasses.dataclass(frozen=True)
class AlternativesIndex:
    """Lamp types with a family or a withdrawal date, and where retrofit options apply."""

    types: frozenset[int]  # lamp types with a family or a withdrawal date
    option_types: frozenset[int]  # lamp types a (not retired) retrofit option names
    option_areas: frozenset[int]  # areas a (not retired) retrofit option names


_INDEX_KEY = "lamp_choice_alternatives"


@event.listens_for(Session, "after_flush")
def _forget_index(session: Session, _ctx: object) -> None:
    """A flushed lamp type or retrofit option makes the kept index stale."""
    if _INDEX_KEY in session.info and any(
        isinstance(o, LampType | RetrofitOption)
        for o in (*session.new, *session.dirty, *session.deleted)
    ):
        session.info.pop(_INDEX_KEY, None)


def alternatives_index(session: Session) -> AlternativesIndex:
    """Two queries, kept for the session's current transaction (a weekly run asks per area)."""
    tx = session.get_transaction()
    cached = session.info.get(_INDEX_KEY)
    if cached is not None and tx is not None and cached[0] is tx:
        return cached[1]
    types = session.scalars(
        select(LampType.id).where(
            or_(LampType.family.is_not(None), LampType.withdrawn_after.is_not(None))
        )
    ).all()
    opts = session.execute(
        select(RetrofitOption.lamp_type_id, RetrofitOption.area_id).where(
            RetrofitOption.retired_at.is_(None)
        )
    ).all()
    index = AlternativesIndex(
        types=frozenset(types),
        option_types=frozenset(t for t, _ in opts if t is not None),
        option_areas=frozenset(a for _, a in opts if a is not None),
    )
    if tx is not None:
        session.info[_INDEX_KEY] = (tx, index)
    return index


def has_alternatives(session: Session, plan: AreaPlan, *, cached: bool = False) -> bool:
    """Whether any lamp type of the plan has a family, a retrofit option or a withdrawal.

    cached: use the index kept for the current transaction (the weekly run, which writes no
    option); otherwise read afresh.
    """
    ids = {g.lamp_type_id for g in plan.groups}
    if not ids:
        return False
    if not cached:
        session.info.pop(_INDEX_KEY, None)
    ix = alternatives_index(session)
    return bool(ids & ix.types or ids & ix.option_types or plan.area.id in ix.option_areas)
