"""`lampkeeper runs start|list`, and the app starting and stopping the scheduler."""

from __future__ import annotations

import pytest
from fastapi.testclient import TestClient
from sqlalchemy import select
from sqlalchemy.orm import Session, sessionmaker

from service import cli
from service.main import create_app
from service.scheduling import cli as runs_cli
from service.scheduling import scheduler as scheduler_mod
from service.scheduling.models import WeeklyRun
from tests.factories import plan_area, plan_fixtures, plan_lamp_type, plan_site


def test_runs_start_and_list(
    db: Session,
    factory: sessionmaker[Session],
    monkeypatch: pytest.MonkeyPatch,
    capsys: pytest.CaptureFixture[str],
) -> None:
    s = plan_site(db)
    plan_fixtures(db, plan_area(db, s), plan_lamp_type(db), 2, hours_at_install=20_000.0)
    db.commit()
    monkeypatch.setattr(runs_cli, "session_factory", lambda: factory)
    assert cli.main(["runs", "start", "--site", s.name, "--week", "2026-W49"]) == 0
    out = capsys.readouterr().out
    assert "2026-W49: succeeded, 1 orders created (1 group, 0 spot)" in out
    assert cli.main(["runs", "start", "--site", str(s.id), "--week", "2026-W49"]) == 0
    assert "0 orders created" in capsys.readouterr().out
    assert cli.main(["runs", "list", "--site", s.name]) == 0
    listed = capsys.readouterr().out.strip().splitlines()
    assert len(listed) == 2 and all("\tcli\tsucceeded" in x for x in listed)
    assert cli.main(["runs", "start", "--site", "No Such Site"]) == 2
    assert cli.main(["runs", "start", "--site", s.name, "--week", "2026-W99"]) == 2
    runs = db.scalars(select(WeeklyRun).where(WeeklyRun.site_id == s.id)).all()
    assert len(runs) == 2


class _FakeScheduler:
    def __init__(self) -> None:
        self.stopped = False

    def shutdown(self) -> None:
        self.stopped = True


def test_app_starts_and_stops_the_scheduler(monkeypatch: pytest.MonkeyPatch) -> None:
    fake = _FakeScheduler()
    started: list[bool] = []

    def start() -> _FakeScheduler:
        started.append(True)
        return fake

    monkeypatch.setattr(scheduler_mod, "start_scheduler", start)
    with TestClient(create_app(start_scheduler=True)) as c:
        assert c.get("/healthz").status_code == 200
        assert started == [True] and not fake.stopped
    assert fake.stopped
    with TestClient(create_app(start_scheduler=False)):
        assert started == [True]  # not started again
