"""The quick paths of position_ages against the code they replaced, on a random portfolio.

Oracles: tests/readings/legacy_ages.py (the pre-split function with the scope subqueries
repeated in every query) read through the generic driver-rows path
(readings.repository.rows_matrix); numpy's own np.unique(axis=0) for the reading groups;
and, on the local PostgreSQL server in every pass, the driver's rows of the same
statement for the binary float8 aggregates.
"""

from __future__ import annotations

from dataclasses import fields
from datetime import UTC, datetime, timedelta

import numpy as np
import pytest
from sqlalchemy import Float, column, func, literal, select, union_all
from sqlalchemy.engine import make_url
from sqlalchemy.orm import Session

import tests.readings.legacy_ages as legacy
from service.db.session import make_engine
from service.readings import operating_voltage
from service.readings.ages import PositionAges, position_ages
from service.readings.models import BurnHourRecord, VoltageReading
from service.readings.operating_voltage import _row_groups
from service.readings.repository import float_matrix, rows_matrix
from service.register.models import Fixture, LampPosition
from tests import factories as fx
from tests.conftest import local_postgres_url

T0 = datetime(2025, 1, 1, tzinfo=UTC)
AT = datetime(2026, 1, 1, tzinfo=UTC)
KINDS = ("none", "reactor", "electronic", "led_driver", "regulating")


def _records(db: Session, rng: np.random.Generator, site_id: int, **target: int) -> None:
    """Consecutive, non-overlapping period records (random gaps) for one target."""
    t = T0 + timedelta(days=float(rng.uniform(0, 60)))
    for _ in range(int(rng.integers(3, 12))):
        length = timedelta(days=float(rng.uniform(1, 30)))
        starts = None if rng.random() < 0.3 else float(rng.integers(0, 40))
        db.add(
            BurnHourRecord(
                site_id=site_id,
                kind="period",
                period_start=t,
                period_end=t + length,
                hours=float(rng.uniform(0, 24)) * length.days,
                starts=starts,
                **target,
            )
        )
        t += length + timedelta(days=float(rng.choice([0.0, rng.uniform(0, 20)])))


def _portfolio(db: Session, seed: int) -> None:
    """Two sites, areas with and without schedules, records and readings of both kinds."""
    rng = np.random.default_rng(seed)
    lt = [fx.lamp_type(db, code=f"T{k}") for k in range(3)]
    for s_no in range(2):
        s = fx.site(db, name=f"Site {s_no}", nominal_voltage_v=[230.0, 120.0][s_no])
        for a_no in range(3):
            sched = {} if a_no != 2 else {"hours_per_day": None, "starts_per_day": None}
            a = fx.area(db, s, name=f"A{a_no}", **sched)
            for f_no in range(int(rng.integers(3, 8))):
                f = Fixture(
                    site_id=s.id,
                    area_id=a.id,
                    tag=f"F{s_no}-{a_no}-{f_no}",
                    lamp_type_id=lt[int(rng.integers(0, 3))].id,
                    lamps_per_fixture=2,
                    ballast_kind=str(rng.choice(KINDS)),
                    measured_voltage_v=None if rng.random() < 0.6 else float(rng.uniform(200, 240)),
                    retired_at=AT - timedelta(days=5) if rng.random() < 0.15 else None,
                )
                db.add(f)
                db.flush()
                for n in (1, 2):
                    put_in = T0 + timedelta(days=float(rng.uniform(0, 300)))
                    dark = put_in + timedelta(days=40) if rng.random() < 0.2 else None
                    db.add(
                        LampPosition(
                            fixture_id=f.id,
                            position_no=n,
                            lamp_installed_at=put_in,
                            hours_at_install=float(rng.choice([0.0, rng.uniform(0, 900)])),
                            starts_at_install=float(rng.integers(0, 50)),
                            burned_out_at=dark,
                        )
                    )
                if rng.random() < 0.3:
                    _records(db, rng, s.id, fixture_id=f.id)
                for _ in range(int(rng.random() < 0.3) * int(rng.integers(1, 4))):
                    when = T0 + timedelta(days=float(rng.uniform(0, 400)))
                    db.add(
                        VoltageReading(
                            site_id=s.id,
                            fixture_id=f.id,
                            measured_at=when,
                            volts=float(rng.uniform(205, 245)),
                        )
                    )
            if a_no != 1:
                _records(db, rng, s.id, area_id=a.id)
            for m in range(int(rng.integers(0, 5))):
                when = T0 + timedelta(days=30.0 * m + float(rng.uniform(0, 5)))
                db.add(
                    VoltageReading(
                        site_id=s.id,
                        area_id=a.id,
                        measured_at=when,
                        volts=float(rng.uniform(205, 245)),
                    )
                )
    db.flush()


def _equal(a: PositionAges, b: PositionAges) -> None:
    assert a.size == b.size
    for f in fields(PositionAges):
        x, y = getattr(a, f.name), getattr(b, f.name)
        if f.name == "history":
            for part in ("position", "hours", "voltage", "starts"):
                u, v = getattr(x, part), getattr(y, part)
                assert np.array_equal(u, v, equal_nan=u.dtype.kind == "f"), part
        elif isinstance(x, np.ndarray):
            assert np.array_equal(x, y, equal_nan=x.dtype.kind == "f"), f.name
        else:
            assert x == y, f.name


@pytest.mark.parametrize("seed", [1, 2])
def test_ages_equal_the_old_queries_read_row_by_row(
    db: Session, monkeypatch: pytest.MonkeyPatch, seed: int
) -> None:
    _portfolio(db, seed)
    sites = sorted(db.scalars(select(Fixture.site_id).distinct()))
    areas = sorted(db.scalars(select(Fixture.area_id).distinct()))
    fixture = db.scalar(select(func.max(BurnHourRecord.fixture_id)))  # one with own records
    some = list(db.scalars(select(LampPosition.id).order_by(LampPosition.id).limit(9)))
    types = sorted(db.scalars(select(Fixture.lamp_type_id).distinct()))
    scopes: list[dict[str, object]] = [
        {},
        {"active_only": True},
        {"site_id": sites[0], "active_only": True},
        {"site_id": sites[1]},
        {"area_id": areas[2]},
        {"fixture_id": fixture},
        {"lamp_type_id": types[0]},
        {"position_ids": some},
        {"position_ids": some, "active_only": True},
    ]
    for scope in scopes:
        for at in (AT, AT - timedelta(days=200)):
            new = position_ages(db, at=at, **scope)  # type: ignore[arg-type]
            with monkeypatch.context() as m:  # the old row-by-row reads throughout
                m.setattr(legacy, "float_matrix", rows_matrix)
                m.setattr(operating_voltage, "float_matrix", rows_matrix)
                old = legacy.legacy_position_ages(db, at=at, **scope)  # type: ignore[arg-type]
            assert new.size > 0, scope
            _equal(new, old)
    ages = position_ages(db, at=AT)
    # The portfolio exercises every voltage source and some segmented histories.
    sources = set(ages.voltage_source.tolist())
    assert "readings_weighted" in sources and len(sources) >= 2, sources
    assert ages.history.position.size > 0


def test_row_groups_are_numpys_unique_rows() -> None:
    rng = np.random.default_rng(7)
    for n in (0, 1, 2, 50, 5000):
        sig = rng.integers(0, 3, size=(n, 5)).astype(np.float64)
        sig[rng.random((n, 5)) < 0.05] = np.nan
        sig[rng.random((n, 5)) < 0.05] = -0.0  # equal to 0.0, as for np.unique
        _, first, inverse = np.unique(sig, axis=0, return_index=True, return_inverse=True)
        got_first, got_inverse = _row_groups(sig)
        assert np.array_equal(got_first, first)
        assert np.array_equal(got_inverse, np.ravel(inverse))


def test_postgres_binary_columns_match_the_driver_rows() -> None:
    """The float8 aggregates read in binary give the rows the driver gives (every pass)."""
    url = make_url(local_postgres_url()).set(database="postgres")
    engine = make_engine(url.render_as_string(hide_password=False))
    values = [
        (1, 2.5, None, -3),
        (2_147_483_647, -0.0, 1.0e300, None),
        (7, float("inf"), 1.735689600123456e9, 0),
        (3, None, None, None),
    ]
    rows = [select(*(literal(v, Float).label(f"c{j}") for j, v in enumerate(r))) for r in values]
    stmt = select(*(column(f"c{j}") for j in range(4))).select_from(union_all(*rows).subquery())
    try:
        with Session(engine) as s:
            assert s.connection().dialect.name == "postgresql"
            got = float_matrix(s, stmt, 4)
            want = rows_matrix(s, stmt, 4)
            assert got.shape == (4, 4)
            order_g, order_w = np.argsort(got[:, 0]), np.argsort(want[:, 0])
            assert np.array_equal(got[order_g], want[order_w], equal_nan=True)
            assert np.signbit(got[order_g][3, 1])  # -0.0 kept (the row with c0 = 2**31 - 1)
            empty = stmt.where(column("c0") > 1e12)
            assert float_matrix(s, empty, 4).shape == (0, 4)
    finally:
        engine.dispose()
