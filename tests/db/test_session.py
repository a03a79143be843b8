"""SQLite writers queue behind each other instead of failing on a lock upgrade."""

from __future__ import annotations

import threading
import time
from pathlib import Path

from sqlalchemy import Engine, text
from sqlalchemy.exc import OperationalError
from sqlalchemy.orm import Session, sessionmaker

from service.db.session import begin_write, make_engine, session_factory


def _table(tmp_path: Path) -> tuple[Engine, sessionmaker[Session]]:
    engine = make_engine(f"sqlite:///{tmp_path / 'w.sqlite3'}")
    with engine.begin() as conn:
        conn.execute(text("CREATE TABLE t (n INTEGER)"))
    return engine, session_factory(engine)


def _writer(
    factory: sessionmaker[Session],
    *,
    as_writer: bool,
    has_read: threading.Event,
    before_write: threading.Event | None,
    errors: list[BaseException],
) -> None:
    try:
        with factory() as s:
            if as_writer:
                begin_write(s)
            n = s.execute(text("SELECT count(*) FROM t")).scalar_one()
            has_read.set()
            if before_write is not None:
                before_write.wait(5)
            else:
                time.sleep(0.2)
            s.execute(text("INSERT INTO t (n) VALUES (:n)"), {"n": n})
            s.commit()
    except BaseException as exc:  # collected for the main thread's assertions
        errors.append(exc)
        has_read.set()


def _rows(engine: Engine) -> list[int]:
    with engine.connect() as conn:
        return list(conn.execute(text("SELECT n FROM t ORDER BY n")).scalars())


def test_writers_begin_immediate_and_queue(tmp_path: Path) -> None:
    engine, factory = _table(tmp_path)
    errors: list[BaseException] = []
    a_read, b_read = threading.Event(), threading.Event()
    a = threading.Thread(
        target=_writer,
        args=(factory,),
        kwargs={"as_writer": True, "has_read": a_read, "before_write": None, "errors": errors},
    )
    a.start()
    a_read.wait(5)
    # The second writer waits at BEGIN IMMEDIATE until the first commits, then sees its row.
    _writer(factory, as_writer=True, has_read=b_read, before_write=None, errors=errors)
    a.join(10)
    assert errors == [] and _rows(engine) == [0, 1]
    engine.dispose()


def test_a_deferred_reader_cannot_upgrade_after_another_write(tmp_path: Path) -> None:
    # Why writers begin as writers: a deferred transaction that read before another
    # connection committed a write is refused when it tries to write (stale snapshot).
    engine, factory = _table(tmp_path)
    errors: list[BaseException] = []
    b_read = threading.Event()
    b = threading.Thread(
        target=_writer,
        args=(factory,),
        kwargs={"as_writer": False, "has_read": b_read, "before_write": None, "errors": errors},
    )
    # A (this thread) reads, lets B read, then writes and commits before B writes.
    with factory() as s:
        n = s.execute(text("SELECT count(*) FROM t")).scalar_one()
        b.start()
        b_read.wait(5)
        s.execute(text("INSERT INTO t (n) VALUES (:n)"), {"n": n})
        s.commit()
    b.join(10)
    assert len(errors) == 1 and isinstance(errors[0], OperationalError)
    assert _rows(engine) == [0]
    engine.dispose()
