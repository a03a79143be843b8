"""The one bulk writer on this run's database: ids back in row order, values stored as the
ORM stores them, defaults filled, and a failure leaves nothing behind."""

from __future__ import annotations

import threading
from datetime import UTC, datetime

import numpy as np
import pytest
from sqlalchemy import Engine, Table, func, select, text
from sqlalchemy.exc import IntegrityError
from sqlalchemy.orm import Session

from service.readings.models import BurnHourRecord, VoltageReading
from service.register.models import Area
from service.uploads.write import Epoch, write_rows
from tests import factories as fx

AREAS: Table = Area.__table__  # type: ignore[assignment]
BURN: Table = BurnHourRecord.__table__  # type: ignore[assignment]
VOLTS: Table = VoltageReading.__table__  # type: ignore[assignment]


def test_ids_come_back_in_row_order(db: Session) -> None:
    s = fx.site(db)
    names = [f"Zone {i}" for i in range(25)]
    ids = write_rows(db, AREAS, {"site_id": [s.id] * 25, "name": names}, return_ids=True)
    stored = db.execute(select(Area.id, Area.name).where(Area.site_id == s.id)).all()
    assert sorted(stored) == sorted(zip(ids, names, strict=True))
    assert len(set(ids)) == 25
    # Python-side defaults of the columns left out are filled as an ORM insert fills them.
    a = db.get(Area, ids[0])
    assert a is not None and a.access_method == "ladder" and a.starts_per_day == 1.0
    more = write_rows(db, AREAS, {"site_id": [s.id], "name": ["Late"]}, return_ids=True)
    assert more[0] not in ids and db.get(Area, more[0]) is not None


def test_ids_after_orm_rows_and_in_small_chunks(
    db: Session, monkeypatch: pytest.MonkeyPatch
) -> None:
    from service.config import get_settings

    monkeypatch.setattr(get_settings(), "bulk_chunk_rows", 3)  # several executemany batches
    s = fx.site(db)
    orm = fx.area(db, s, name="By ORM")
    ids = write_rows(
        db, AREAS, {"site_id": [s.id] * 10, "name": [f"B{i}" for i in range(10)]}, return_ids=True
    )
    assert orm.id not in ids
    by_id = dict(db.execute(select(Area.id, Area.name).where(Area.id.in_(ids))).all())
    assert [by_id[i] for i in ids] == [f"B{i}" for i in range(10)]


def test_chunks_keep_numpy_columns_and_one_default_time(
    db: Session, monkeypatch: pytest.MonkeyPatch
) -> None:
    """Values are made chunk by chunk; a callable default (created_at) is still one moment."""
    from service.config import get_settings

    monkeypatch.setattr(get_settings(), "bulk_chunk_rows", 4)
    s = fx.site(db)
    n = 11  # two full chunks and a short one
    per_day = np.arange(n, dtype=np.float64) / 2.0
    ids = write_rows(
        db,
        AREAS,
        {"site_id": [s.id] * n, "name": [f"C{i}" for i in range(n)], "starts_per_day": per_day},
        return_ids=True,
    )
    rows = db.execute(
        select(Area.id, Area.starts_per_day, Area.created_at).where(Area.id.in_(ids))
    ).all()
    by_id = {r[0]: r for r in rows}
    assert [by_id[i][1] for i in ids] == per_day.tolist()
    assert len({r[2] for r in rows}) == 1


def test_nothing_to_write(db: Session) -> None:
    assert write_rows(db, AREAS, {"site_id": [], "name": []}, return_ids=True) == []


def test_columns_of_unequal_length_are_refused(db: Session) -> None:
    s = fx.site(db)
    with pytest.raises(ValueError, match="one value per row"):
        write_rows(db, AREAS, {"site_id": [s.id, s.id], "name": ["only one"]})


def test_epoch_and_numpy_columns_are_stored_like_orm_values(db: Session) -> None:
    s = fx.site(db)
    a = fx.area(db, s)
    lt = fx.lamp_type(db)
    (f,) = fx.fixtures(db, a, lt)
    at = datetime(2025, 3, 4, 5, 6, 7, 891011, tzinfo=UTC)
    db.add(VoltageReading(site_id=s.id, fixture_id=f.id, measured_at=at, volts=231.5))
    db.flush()
    write_rows(
        db,
        VOLTS,
        {
            "site_id": np.array([s.id]),
            "area_id": np.array([-1]),  # negative: NULL
            "fixture_id": np.array([f.id]),
            "measured_at": Epoch(np.array([at.timestamp()])),
            "volts": np.array([231.5]),
            "note": [None],
        },
    )
    rows = db.execute(
        text(
            "SELECT CAST(measured_at AS VARCHAR(60)), volts, area_id FROM voltage_readings "
            "ORDER BY id"
        )
    ).all()
    assert len(rows) == 2 and rows[0] == rows[1]
    got = db.scalars(select(VoltageReading.measured_at)).all()
    assert got == [at, at]


def test_a_failing_row_leaves_no_rows(db: Session) -> None:
    s = fx.site(db)
    a = fx.area(db, s)
    lt = fx.lamp_type(db)
    (f,) = fx.fixtures(db, a, lt)
    db.commit()
    n = 500
    t0 = datetime(2025, 1, 1, tzinfo=UTC).timestamp()
    start = t0 + 3600.0 * np.arange(n)
    area = np.full(n, -1)
    area[-1] = a.id  # the last row names both targets: the one_target check fails
    with pytest.raises(IntegrityError):
        write_rows(
            db,
            BURN,
            {
                "site_id": np.full(n, s.id),
                "area_id": area,
                "fixture_id": np.full(n, f.id),
                "kind": ["period"] * n,
                "period_start": Epoch(start),
                "period_end": Epoch(start + 3600.0),
                "hours": np.ones(n),
            },
        )
    db.rollback()
    assert db.scalar(select(func.count()).select_from(BurnHourRecord)) == 0


@pytest.mark.postgres_only
def test_two_writers_at_once_get_distinct_ids(engine: Engine) -> None:
    # Two sessions write into the same table at the same moment (a barrier lines them
    # up); sequence values are never handed out twice, so the ids cannot collide.
    with Session(engine) as setup:
        s = fx.site(setup, name="Writer Race Site")
        setup.commit()
        site_id = s.id
    barrier = threading.Barrier(2)
    got: dict[int, list[int]] = {}

    def write(k: int) -> None:
        with Session(engine) as session:
            session.execute(select(1))
            barrier.wait()
            names = [f"W{k}-{i}" for i in range(200)]
            got[k] = write_rows(
                session, AREAS, {"site_id": [site_id] * 200, "name": names}, return_ids=True
            )
            session.commit()

    threads = [threading.Thread(target=write, args=(k,)) for k in (0, 1)]
    for t in threads:
        t.start()
    for t in threads:
        t.join()
    try:
        assert not set(got[0]) & set(got[1])
        with Session(engine) as check:
            stored = dict(
                check.execute(select(Area.id, Area.name).where(Area.site_id == site_id)).all()
            )
        for k in (0, 1):
            assert [stored[i] for i in got[k]] == [f"W{k}-{i}" for i in range(200)]
    finally:
        with Session(engine) as cleanup:
            cleanup.execute(Area.__table__.delete().where(Area.site_id == site_id))
            cleanup.execute(text("DELETE FROM sites WHERE id = :i"), {"i": site_id})
            cleanup.commit()
