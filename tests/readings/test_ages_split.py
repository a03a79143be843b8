"""position_ages (load -> compute -> voltages) against the code it replaced, on the demo.

Oracle: tests/readings/legacy_ages.py, the single 184-line function as it was (with the old
extract(epoch) cast). Every array must be equal, for each scope the callers use.
"""

from __future__ import annotations

from dataclasses import fields
from datetime import UTC, datetime, timedelta
from pathlib import Path

import numpy as np
from sqlalchemy import func, select
from sqlalchemy.orm import Session

from service.readings.ages import PositionAges, position_ages
from service.register.models import Area, Fixture, LampPosition, Site
from service.seed.loader import load_demo
from tests.readings.legacy_ages import legacy_position_ages


def _equal(a: PositionAges, b: PositionAges) -> None:
    assert a.size == b.size
    for f in fields(PositionAges):
        x, y = getattr(a, f.name), getattr(b, f.name)
        if f.name == "history":
            for part in ("position", "hours", "voltage"):
                assert np.array_equal(getattr(x, part), getattr(y, part)), part
        elif isinstance(x, np.ndarray):
            assert np.array_equal(x, y, equal_nan=x.dtype.kind == "f"), f.name
        else:
            assert x == y, f.name


def test_ages_are_unchanged_on_the_demo(db: Session, tmp_path: Path) -> None:
    load_demo(db, key_file=tmp_path / "key.txt")
    db.commit()
    now = datetime.now(UTC)
    site = db.scalar(select(func.min(Site.id)))
    area = db.scalar(select(func.min(Area.id)))
    fixture = db.scalar(select(func.max(Fixture.id)))
    some = list(db.scalars(select(LampPosition.id).order_by(LampPosition.id).limit(7)))
    scopes = [
        {},
        {"active_only": True},
        {"site_id": site, "active_only": True},
        {"area_id": area},
        {"fixture_id": fixture},
        {"position_ids": some},
    ]
    for scope in scopes:
        for at in (now, now - timedelta(days=40)):
            new = position_ages(db, at=at, **scope)  # type: ignore[arg-type]
            old = legacy_position_ages(db, at=at, **scope)  # type: ignore[arg-type]
            assert new.size > 0
            _equal(new, old)
    # The demo has readings: some ages come from them, some voltages too.
    ages = position_ages(db, at=now)
    assert {"readings_weighted", "site_nominal"} & set(ages.voltage_source.tolist())
