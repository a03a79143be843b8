"""Test-side failure injection: SQLAlchemy session events on a test's session factory."""

from __future__ import annotations

from collections.abc import Iterator
from contextlib import contextmanager

from sqlalchemy import event
from sqlalchemy.orm import ORMExecuteState, Session, sessionmaker


@contextmanager
def fail_before_lines(factory: sessionmaker[Session], message: str) -> Iterator[None]:
    """Raise at the insert of work-order lines: the orders are written, their lines not yet."""

    def listener(state: ORMExecuteState) -> None:
        table = getattr(state.statement, "table", None)
        if state.is_insert and getattr(table, "name", None) == "work_order_lines":
            raise RuntimeError(message)

    event.listen(factory, "do_orm_execute", listener)
    try:
        yield
    finally:
        event.remove(factory, "do_orm_execute", listener)
