"""`lampkeeper users create|list|disable|set-password` through the console script."""

from __future__ import annotations

from collections.abc import Iterator
from contextlib import contextmanager

import pytest
from sqlalchemy.orm import Session

from service import cli
from service.db import session as db_session
from service.users.service import SignInRefused, sign_in


@pytest.fixture()
def on_test_db(db: Session, monkeypatch: pytest.MonkeyPatch) -> Session:
    """Make the command's transaction use the test's rolled-back session."""

    @contextmanager
    def transaction() -> Iterator[Session]:
        yield db
        db.flush()

    monkeypatch.setattr(db_session, "transaction", transaction)
    return db


def test_create_list_disable_and_set_password(
    on_test_db: Session, monkeypatch: pytest.MonkeyPatch, capsys: pytest.CaptureFixture[str]
) -> None:
    db = on_test_db
    monkeypatch.setenv("LAMPKEEPER_NEW_PASSWORD", "first-long-passphrase")
    assert cli.main(["users", "create", "Dana", "--role", "technician", "--name", "Dana K"]) == 0
    assert "created with role technician" in capsys.readouterr().out
    assert sign_in(db, "dana", "first-long-passphrase", "10.0.0.1").row.user_id > 0
    # The same name again is refused, naming it, with exit status 2 and nothing changed.
    assert cli.main(["users", "create", "dana", "--role", "viewer"]) == 2
    assert "dana" in capsys.readouterr().err.lower()
    assert cli.main(["users", "list"]) == 0
    listed = [line.split("\t") for line in capsys.readouterr().out.splitlines()]
    assert ["dana", "technician", "active", "Dana K"] in listed
    monkeypatch.setenv("LAMPKEEPER_NEW_PASSWORD", "second-long-passphrase")
    assert cli.main(["users", "set-password", "dana"]) == 0
    with pytest.raises(SignInRefused):
        sign_in(db, "dana", "first-long-passphrase", "10.0.0.2")
    assert sign_in(db, "dana", "second-long-passphrase", "10.0.0.3").row.user_id > 0
    assert cli.main(["users", "disable", "dana"]) == 0
    with pytest.raises(SignInRefused):
        sign_in(db, "dana", "second-long-passphrase", "10.0.0.4")
    assert cli.main(["users", "list"]) == 0
    assert "dana\ttechnician\tdisabled" in capsys.readouterr().out
    # An unknown user: a clear error, status 2.
    assert cli.main(["users", "disable", "nobody"]) == 2
