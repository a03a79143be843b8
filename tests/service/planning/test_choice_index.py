"""The per-transaction index of areas with something to choose stays true after writes."""

from __future__ import annotations

from sqlalchemy.orm import Session

from service.catalogue.models import RetrofitOption
from service.planning.choice import alternatives_index
from tests import factories as fx


def test_index_is_kept_within_a_transaction_and_forgotten_after_a_flushed_change(
    db: Session,
) -> None:
    s = fx.site(db)
    a = fx.area(db, s)
    lt = fx.lamp_type(db)
    first = alternatives_index(db)
    assert lt.id not in first.types and a.id not in first.option_areas
    assert alternatives_index(db) is first  # two queries per transaction, not per area
    db.add(
        RetrofitOption(
            code="IX-1", kind="luminaire", area_id=a.id, kit_cost_per_unit=50.0,
            labour_minutes_per_unit=20.0, watts_per_unit=30.0, lumens_per_unit=3000.0,
            l70_h=50_000.0,
        )
    )  # fmt: skip
    db.flush()
    second = alternatives_index(db)
    assert second is not first and a.id in second.option_areas
    lt.family = "A19 100 W"
    db.flush()
    assert lt.id in alternatives_index(db).types
