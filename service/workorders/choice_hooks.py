"""The lamp choice a group work order names: computed when the order is built, recorded after.

Each due lamp type's best option (planning.choice: lowest life-cycle cost that can be bought
and keeps the light floor) goes into the order's plan figures as "lamp_choice", and one
LampChoiceRecord per (order, lamp type) keeps it as history (a retrofit option named there
is retired, never deleted). Areas with nothing to choose (no family, retrofit option or
withdrawal date on their types) cost the weekly run nothing: two queries per transaction
tell which areas have something to choose (planning.choice.alternatives_index).

Switched lines: where the best option fits another lamp (the type rated for the measured
voltage, or an LED-lamp retrofit), the group order's lines of that type name the lamp to
fit (lamp_type_id, lamp_type_code) and keep the lamp they replace in `extra`
(replaces_lamp_type_id, option_kind, retrofit_option_id), so stock reserves and issues the
lamps fitted. An LED-lamp retrofit fits the catalogue type of its kit: the type with the
option's code, made from the option's figures when the catalogue has none (marked in its
extra). A replacement luminaire swaps the fixture, not a lamp: its lines keep the current
type and say so; the new fixture is a register change after the work.

Completion (switch_fixtures): a switched line done whole (every position of the fixture on
it, none skipped) changes the fixture's lamp type to the one fitted; the removals recorded
just before keep the old type, which is what field fits of that type read. A switched line
done in part is refused (422): one fixture cannot hold two lamp types, and the register has
one type per fixture. Skipped whole, the fixture keeps its type.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from typing import Any

from sqlalchemy import func, insert, select
from sqlalchemy.exc import IntegrityError
from sqlalchemy.orm import Session

from service.api.errors import Invalid
from service.catalogue.models import LampChoiceRecord, LampType, RetrofitOption
from service.planning.choice import area_choice, has_alternatives
from service.planning.lamp_choice import RATED_FOR_VOLTAGE, RETROFIT
from service.planning.service import AreaPlan
from service.register.models import Fixture, LampPosition, Site
from service.workorders.models import LineOutcome, WorkOrder


def order_choice(session: Session, plan: AreaPlan, types: set[int]) -> list[dict[str, Any]] | None:
    """The best option per due lamp type, as plain JSON for the order; None: nothing to choose."""
    if not has_alternatives(session, plan, cached=True):
        return None
    try:
        choices = area_choice(session, plan, lamp_type_ids=types)
    except ValueError as exc:  # the order still goes out; the reason is kept with it
        return [{"lamp_type_id": t, "note": f"lamp choice not available: {exc}"} for t in types]
    out = []
    for tc in choices:
        c, best = tc.comparison, tc.comparison.best
        entry: dict[str, Any] = {
            "lamp_type_id": tc.group.lamp_type_id,
            "replacement_required": c.replacement_required,
            "notes": list(c.notes),
        }
        if best is not None:
            entry.update(
                option_kind=best.option.kind,
                label=best.option.label,
                chosen_lamp_type_id=best.option.lamp_type_id,
                retrofit_option_id=best.option.retrofit_option_id,
                life_cycle_cost=round(best.life_cycle_cost, 2),
                saving_npv=round(best.saving_npv, 2),
                simple_payback_years=best.simple_payback_years,
            )
        out.append(entry)
    return out


def record_choices(session: Session, orders: list[tuple[int, dict[str, Any] | None]]) -> None:
    """One history row per (order, lamp type) whose plan figures name a chosen option."""
    rows = []
    for oid, plan in orders:
        for entry in (plan or {}).get("lamp_choice") or []:
            if "option_kind" not in entry:
                continue
            rows.append(
                {
                    "work_order_id": oid,
                    "for_lamp_type_id": entry["lamp_type_id"],
                    "option_kind": entry["option_kind"],
                    "label": entry["label"][:200],
                    "lamp_type_id": entry["chosen_lamp_type_id"],
                    "retrofit_option_id": entry["retrofit_option_id"],
                    "npv": entry["life_cycle_cost"],
                }
            )
    if rows:
        session.execute(insert(LampChoiceRecord), rows)


def kit_lamp_type(session: Session, opt: RetrofitOption, site: Site) -> LampType:
    """The catalogue type an LED-lamp retrofit fits: by the option's code, else made from it."""
    found = session.scalar(select(LampType).where(LampType.code == opt.code))
    if found is not None:
        return found
    lt = LampType(
        code=opt.code,
        description=(opt.description or f"LED lamp of retrofit option {opt.code}")[:300],
        technology="led",
        rated_watts=opt.watts_per_unit,
        rated_volts=site.nominal_voltage_v,
        rated_life_h=opt.l70_h,  # LED: rated life is L70
        rated_percentile=50.0,
        weibull_shape=opt.failure_shape,
        failure_b10_h=opt.failure_b10_h,
        initial_lumens=opt.lumens_per_unit,
        unit_price=opt.kit_cost_per_unit,
        contains_mercury=False,
        rupture_risk=False,
        extra={"made_from_retrofit_option_id": opt.id},
    )
    try:
        with session.begin_nested():  # a concurrent run made it first: use that one
            session.add(lt)
    except IntegrityError:
        found = session.scalar(select(LampType).where(LampType.code == opt.code))
        assert found is not None
        return found
    return lt


def switches(
    session: Session, site: Site, plan: Mapping[str, Any] | None
) -> dict[int, dict[str, Any]]:
    """Due lamp type -> what its lines fit instead: {lamp_type_id, code, extra}."""
    out: dict[int, dict[str, Any]] = {}
    for e in (plan or {}).get("lamp_choice") or []:
        kind, old = e.get("option_kind"), e["lamp_type_id"]
        extra = {
            "replaces_lamp_type_id": old,
            "option_kind": kind,
            "option_label": e.get("label"),
            "retrofit_option_id": e.get("retrofit_option_id"),
        }
        if kind == RATED_FOR_VOLTAGE and e.get("chosen_lamp_type_id") not in (None, old):
            lt = session.get(LampType, e["chosen_lamp_type_id"])
        elif kind == RETROFIT and e.get("retrofit_option_id") is not None:
            opt = session.get(RetrofitOption, e["retrofit_option_id"])
            if opt is None:
                continue
            if opt.kind != "led_lamp":  # a luminaire: the fixture itself is replaced
                extra["note"] = "replacement luminaire: register the new fixture after fitting"
                out[old] = {"lamp_type_id": old, "code": None, "extra": extra}
                continue
            lt = kit_lamp_type(session, opt, site)
        else:
            continue
        if lt is not None:
            session.flush()
            out[old] = {"lamp_type_id": lt.id, "code": lt.code, "extra": extra}
    return out


def apply_switches(lines: list[dict[str, Any]], sw: Mapping[int, dict[str, Any]]) -> None:
    """Point the lines of switched due types at the lamp to fit (the old one in extra)."""
    for ln in lines:
        s = sw.get(ln["lamp_type_id"])
        if s is None or ln["extra"] is not None:
            continue
        ln["extra"] = {**s["extra"], "replaces_lamp_type_code": ln["lamp_type_code"]}
        if s["code"] is not None:
            ln["lamp_type_id"], ln["lamp_type_code"] = s["lamp_type_id"], s["code"]


def _switched(order: WorkOrder) -> list[Any]:
    return [
        ln
        for ln in order.lines
        if ln.extra and ln.extra.get("replaces_lamp_type_id") not in (None, ln.lamp_type_id)
    ]


def check_switched(
    session: Session, order: WorkOrder, resolved: Mapping[int, Sequence[tuple[int, str, Any]]]
) -> None:
    """422 when a switched line would leave a fixture with two lamp types (before any write)."""
    lines = _switched(order)
    if not lines:
        return
    counts = dict(
        session.execute(
            select(LampPosition.fixture_id, func.count(LampPosition.id))
            .where(LampPosition.fixture_id.in_([ln.fixture_id for ln in lines]))
            .group_by(LampPosition.fixture_id)
        ).all()
    )
    errors = []
    for ln in lines:
        done = [e for e in resolved[ln.id] if e[1] != LineOutcome.SKIPPED]
        if done and (len(done) != len(resolved[ln.id]) or counts.get(ln.fixture_id) != len(done)):
            errors.append(
                {
                    "field": "outcomes",
                    "in": "body",
                    "message": f"fixture {ln.fixture_id} is switched to {ln.lamp_type_code}: "
                    "replace all its lamps or skip it whole (one lamp type per fixture)",
                }
            )
    if errors:
        raise Invalid("A switched fixture must be re-lamped whole or skipped.", errors=errors)


def switch_fixtures(session: Session, order: WorkOrder) -> list[int]:
    """Give fixtures whose switched line was done their new lamp type; their ids."""
    moved = []
    for ln in _switched(order):
        if ln.outcome == LineOutcome.SKIPPED:
            continue
        fixture = session.get(Fixture, ln.fixture_id)
        if fixture is not None and fixture.lamp_type_id != ln.lamp_type_id:
            fixture.lamp_type_id = ln.lamp_type_id
            moved.append(fixture.id)
    return moved
