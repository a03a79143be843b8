"""Race harness shared by the concurrency tests: a committed database and threads released together.

Each race module takes `race_engine` and `factory` (module scope: a SQLite file of its own,
or a scratch PostgreSQL database on a PostgreSQL run), and runs its contenders with
`all_at_once` (plain calls) or `in_transactions` (one write transaction per call).
"""

from __future__ import annotations

import os
import threading
from collections.abc import Callable, Iterator
from typing import Any

import pytest
from sqlalchemy import Engine
from sqlalchemy.orm import Session, sessionmaker

from service.api.errors import DomainError
from service.db.session import begin_write, make_engine, session_factory
from tests.conftest import migrate, scratch_postgres


@pytest.fixture(scope="module")
def race_engine(
    request: pytest.FixtureRequest, tmp_path_factory: pytest.TempPathFactory
) -> Iterator[Engine]:
    """A migrated database of the module's own: the threads commit for real."""
    label = request.module.__name__.rsplit(".", 1)[-1].removeprefix("test_")
    base_url = os.environ.get("TEST_DATABASE_URL") or ""
    if base_url.startswith("postgresql"):
        with scratch_postgres(base_url, label) as url:
            eng = make_engine(url)
            try:
                yield eng
            finally:
                eng.dispose()
        return
    eng = make_engine(f"sqlite:///{tmp_path_factory.mktemp(label) / 'races.sqlite3'}")
    migrate(eng)
    try:
        yield eng
    finally:
        eng.dispose()


@pytest.fixture(scope="module")
def factory(race_engine: Engine) -> sessionmaker[Session]:
    """Sessions on the module's database."""
    return session_factory(race_engine)


def all_at_once(calls: list[Callable[[], Any]]) -> list[Any]:
    """Run the calls in threads released together; results or the exceptions raised."""
    barrier = threading.Barrier(len(calls))
    out: list[Any] = [None] * len(calls)

    def run(i: int) -> None:
        barrier.wait()
        try:
            out[i] = calls[i]()
        except Exception as exc:  # the test inspects what each got
            out[i] = exc

    threads = [threading.Thread(target=run, args=(i,)) for i in range(len(calls))]
    for t in threads:
        t.start()
    for t in threads:
        t.join(timeout=120)
    assert all(not t.is_alive() for t in threads), "a contender never finished"
    return out


def in_transactions(factory: sessionmaker[Session], *calls: Callable[[Session], Any]) -> list[str]:
    """Each call in its own write transaction, released together: "ok" or the error status."""

    def attempt(call: Callable[[Session], Any]) -> str:
        with factory() as s:
            try:
                begin_write(s)
                call(s)
                s.commit()
                return "ok"
            except DomainError as exc:
                s.rollback()
                return str(exc.status)

    out = all_at_once([lambda c=c: attempt(c) for c in calls])
    for o in out:
        if isinstance(o, BaseException):
            raise o
    return out
