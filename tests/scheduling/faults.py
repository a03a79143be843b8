"""Test-side failure injection: session events and the bulk writer, on a test's session factory."""

from __future__ import annotations

from collections.abc import Iterator
from contextlib import contextmanager
from typing import Any

from sqlalchemy import event
from sqlalchemy.orm import ORMExecuteState, Session, sessionmaker

from service.workorders import issue


@contextmanager
def fail_before_lines(factory: sessionmaker[Session], message: str) -> Iterator[None]:
    """Raise at the insert of work-order lines: the orders are written, their lines not yet.

    Lines go through the bulk writer (COPY on PostgreSQL, past SQLAlchemy's events), so the
    writer the issue module calls is wrapped too, for sessions of this factory only.
    """

    def listener(state: ORMExecuteState) -> None:
        table = getattr(state.statement, "table", None)
        if state.is_insert and getattr(table, "name", None) == "work_order_lines":
            raise RuntimeError(message)

    real = issue.write_rows

    def writer(session: Session, table: Any, *args: Any, **kwargs: Any) -> list[int]:
        ours = isinstance(session, factory.class_) and session.bind is factory.kw.get("bind")
        if ours and table.name == "work_order_lines":
            raise RuntimeError(message)
        return real(session, table, *args, **kwargs)

    event.listen(factory, "do_orm_execute", listener)
    issue.write_rows = writer  # type: ignore[assignment]
    try:
        yield
    finally:
        issue.write_rows = real
        event.remove(factory, "do_orm_execute", listener)
