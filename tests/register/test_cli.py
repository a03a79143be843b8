"""`lampkeeper import` / `export` for lamp types and fixtures, on the test transaction."""

from __future__ import annotations

from collections.abc import Iterator
from contextlib import contextmanager
from pathlib import Path

import pytest
from sqlalchemy import func, select
from sqlalchemy.orm import Session

from service import cli
from service.db import session as db_session
from service.register.models import Fixture, LampPosition

LAMP_TYPES = (
    "code,technology,rated_watts,rated_volts,rated_life_h\n"
    "CLI-T8,linear_fluorescent,36,230,20000\n"
    "CLI-LED,led,12,230,50000\n"
)
FIXTURES = (
    "site,area,tag,lamp_type,lamps_per_fixture,lamps_installed_at\n"
    "Cli Site,Hall,C-1,CLI-T8,2,2024-01-01T00:00:00Z\n"
    "Cli Site,Hall,C-2,CLI-LED,1,\n"
)


@pytest.fixture()
def on_test_db(db: Session, monkeypatch: pytest.MonkeyPatch) -> Session:
    """Make the CLI's transaction use the test's rolled-back session."""

    @contextmanager
    def transaction() -> Iterator[Session]:
        yield db
        db.flush()

    monkeypatch.setattr(db_session, "transaction", transaction)
    from service.register.models import Area, Site

    site = Site(
        name="Cli Site",
        time_zone="UTC",
        nominal_voltage_v=230,
        currency="EUR",
        energy_price_per_kwh=0.2,
        labour_rate_per_h=30,
    )
    db.add(site)
    db.flush()
    db.add(Area(site_id=site.id, name="Hall"))
    db.flush()
    return db


def test_import_then_export(
    on_test_db: Session, tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    (tmp_path / "lt.csv").write_text(LAMP_TYPES)
    (tmp_path / "fx.csv").write_text(FIXTURES)
    assert cli.main(["import", "lamp-types", str(tmp_path / "lt.csv")]) == 0
    assert cli.main(["import", "fixtures", str(tmp_path / "fx.csv")]) == 0
    out = capsys.readouterr().out
    assert "2 lamp types created" in out and "3 lamp positions added" in out
    assert on_test_db.scalar(select(func.count()).select_from(Fixture)) == 2
    assert on_test_db.scalar(select(func.count()).select_from(LampPosition)) == 3
    assert cli.main(["export", "fixtures", "--site", "Cli Site"]) == 0
    exported = capsys.readouterr().out
    assert exported.splitlines()[0].startswith("site,area,tag,location,lamp_type")
    assert [line.split(",")[2] for line in exported.splitlines()[1:]] == ["C-1", "C-2"]
    assert cli.main(["export", "lamp-types", "--format", "json"]) == 0
    assert '"code": "CLI-LED"' in capsys.readouterr().out


def test_bad_rows_are_printed_and_nothing_saved(
    on_test_db: Session, tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    (tmp_path / "lt.csv").write_text(LAMP_TYPES)
    assert cli.main(["import", "lamp-types", str(tmp_path / "lt.csv")]) == 0
    bad = FIXTURES + "Cli Site,Hall,C-3,CLI-T8,-1,\n"
    (tmp_path / "fx.csv").write_text(bad)
    assert cli.main(["import", "fixtures", str(tmp_path / "fx.csv")]) == 2
    err = capsys.readouterr().err
    assert "row 4 lamps_per_fixture" in err
    assert on_test_db.scalar(select(func.count()).select_from(Fixture)) == 0
    assert cli.main(["import", "fixtures", str(tmp_path / "missing.csv")]) == 2
