"""Key use is written in a short transaction of its own, at most once a minute, skipped when busy."""

from __future__ import annotations

import threading
from collections.abc import Iterator
from contextlib import contextmanager
from datetime import timedelta

import pytest
from sqlalchemy import Engine, delete, select
from sqlalchemy.orm import Session

from service.db.base import utcnow
from service.db.session import WRITE_OPTION
from service.keys import service as keys_service
from service.keys.models import ApiKey
from service.keys.usage import UsageRecorder


class Clock:
    """A hand-moved monotonic clock (seconds)."""

    def __init__(self) -> None:
        self.now = 1000.0

    def __call__(self) -> float:
        return self.now


@pytest.fixture()
def committed_key(engine: Engine) -> Iterator[int]:
    """A key committed for real (the writes under test run in their own transactions)."""
    with Session(engine) as session, session.begin():
        row, _ = keys_service.create_key(session, f"usage-{id(session)}", "read")
        key_id = row.id
    try:
        yield key_id
    finally:
        with Session(engine) as session, session.begin():
            session.execute(delete(ApiKey).where(ApiKey.id == key_id))


def opener_for(engine: Engine):  # type: ignore[no-untyped-def]
    """Short transactions on the test engine, committed on success."""

    @contextmanager
    def open_session() -> Iterator[Session]:
        with Session(engine) as session, session.begin():
            yield session

    return open_session


def stored(engine: Engine, key_id: int):  # type: ignore[no-untyped-def]
    with Session(engine) as session:
        return session.scalar(select(ApiKey.last_used_at).where(ApiKey.id == key_id))


def test_written_at_most_once_per_interval(engine: Engine, committed_key: int) -> None:
    clock = Clock()
    rec = UsageRecorder(interval_s=60.0, clock=clock)
    first = utcnow().replace(microsecond=0)
    rec.note(committed_key, first)
    assert rec.has_due() and rec.flush(opener_for(engine)) == 1
    assert stored(engine, committed_key) == first
    rec.note(committed_key, first + timedelta(seconds=30))
    clock.now += 30
    assert not rec.has_due() and rec.flush(opener_for(engine)) == 0
    assert stored(engine, committed_key) == first  # not yet: less than a minute since the write
    clock.now += 31
    assert rec.flush(opener_for(engine)) == 1
    assert stored(engine, committed_key) == first + timedelta(seconds=30)
    assert rec.pending() == {}


def test_an_older_use_never_moves_last_used_back(engine: Engine, committed_key: int) -> None:
    rec = UsageRecorder(clock=Clock())
    newer = utcnow().replace(microsecond=0)
    rec.note(committed_key, newer)
    rec.flush(opener_for(engine))
    other = UsageRecorder(clock=Clock())  # another replica with an older note
    other.note(committed_key, newer - timedelta(minutes=5))
    assert other.flush(opener_for(engine)) == 1
    assert stored(engine, committed_key) == newer


def test_a_busy_database_skips_the_write_and_keeps_the_note(
    engine: Engine, committed_key: int
) -> None:
    rec = UsageRecorder(clock=Clock())
    used = utcnow().replace(microsecond=0)
    rec.note(committed_key, used)
    blocker = engine.connect()
    try:
        if engine.dialect.name == "sqlite":
            # Another writer holds SQLite's write lock (BEGIN IMMEDIATE).
            tx = blocker.execution_options(**{WRITE_OPTION: True}).begin()
        else:
            # Another transaction holds the key's row (a revoke in progress, say).
            tx = blocker.begin()
            blocker.execute(select(ApiKey.id).where(ApiKey.id == committed_key).with_for_update())
        assert rec.flush(opener_for(engine)) == 0
        tx.rollback()
    finally:
        blocker.close()
    assert stored(engine, committed_key) is None
    assert rec.pending() == {committed_key: used}  # kept for the next try
    assert rec.flush(opener_for(engine)) == 1
    assert stored(engine, committed_key) == used


def test_two_threads_flushing_write_once(engine: Engine, committed_key: int) -> None:
    rec = UsageRecorder(clock=Clock())
    rec.note(committed_key)
    barrier = threading.Barrier(2)
    results: list[int] = []

    def flush() -> None:
        barrier.wait()
        results.append(rec.flush(opener_for(engine)))

    threads = [threading.Thread(target=flush) for _ in range(2)]
    for t in threads:
        t.start()
    for t in threads:
        t.join()
    assert sorted(results) == [0, 1]
    assert stored(engine, committed_key) is not None


def test_find_active_is_a_read(db: Session) -> None:
    _, secret = keys_service.create_key(db, "read-only-check", "read")
    db.commit()
    found = keys_service.find_active(db, secret)
    assert found is not None and found.last_used_at is None
    assert not db.dirty and not db.new


def test_an_exhausted_pool_skips_the_write(committed_key: int) -> None:
    from sqlalchemy.exc import TimeoutError as PoolTimeout

    @contextmanager
    def exhausted() -> Iterator[Session]:
        raise PoolTimeout("QueuePool limit of size 10 overflow 10 reached")
        yield  # pragma: no cover

    rec = UsageRecorder(clock=Clock())
    rec.note(committed_key)
    assert rec.flush(exhausted) == 0
    assert committed_key in rec.pending()
