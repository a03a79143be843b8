"""`lampkeeper demo load [--if-empty]` and `demo key` on a database of their own."""

from __future__ import annotations

from collections.abc import Iterator
from pathlib import Path

import pytest
from sqlalchemy import func, select

from service import cli
from service.config import get_settings
from service.db.session import get_engine, session_factory
from service.register.models import Fixture
from service.seed import files

FIXTURE_ROWS = len((files.seed_dir() / files.FIXTURES).read_text().splitlines()) - 1  # header


@pytest.fixture()
def own_database(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> Iterator[Path]:
    """Point the CLI's settings at a fresh SQLite file (the CLI commits for real)."""
    monkeypatch.setenv("LAMPKEEPER_DATABASE_URL", f"sqlite:///{tmp_path / 'cli.sqlite3'}")
    get_settings.cache_clear()
    get_engine.cache_clear()
    yield tmp_path
    get_engine().dispose()
    get_settings.cache_clear()
    get_engine.cache_clear()


def test_demo_commands(own_database: Path, capsys: pytest.CaptureFixture[str]) -> None:
    key_file = own_database / "demo-key.txt"
    assert cli.main(["migrate"]) == 0
    assert cli.main(["demo", "key", "--key-file", str(key_file)]) == 1  # nothing loaded yet
    assert cli.main(["demo", "load", "--if-empty", "--key-file", str(key_file)]) == 0
    out = capsys.readouterr().out
    assert f"{FIXTURE_ROWS} fixtures" in out and str(key_file) in out
    assert cli.main(["demo", "load", "--if-empty", "--key-file", str(key_file)]) == 0
    assert "demo not loaded" in capsys.readouterr().out
    with session_factory()() as session:
        assert session.scalar(select(func.count()).select_from(Fixture)) == FIXTURE_ROWS
    assert cli.main(["demo", "key", "--key-file", str(key_file)]) == 0
    assert capsys.readouterr().out.strip() == key_file.read_text().strip()
    # Without --if-empty a second load is refused with a message, not a traceback.
    assert cli.main(["demo", "load", "--key-file", str(key_file)]) == 2
    assert "already loaded" in capsys.readouterr().err
