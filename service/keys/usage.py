"""Key use, remembered in memory and written to api_keys.last_used_at at most once a minute.

Checking a key is a read: writing last_used_at inside a GET's transaction made every read
a writer (on SQLite, GETs then queued for the write lock and answered 503 under load).
Instead each use is noted here; a write of its own, in a short transaction after an answer
has gone out, stores the newest use of every key last written over `interval_s` ago. The
write waits briefly for a busy database and otherwise is skipped, to be tried again after
a later request. Each process keeps its own notes (replicas each write at most once a
minute per key); a process that dies loses at most the last minute of use.
"""

from __future__ import annotations

import logging
import threading
import time
from collections.abc import Callable, Collection
from contextlib import AbstractContextManager
from datetime import datetime

from sqlalchemy import or_, select, update
from sqlalchemy.exc import SQLAlchemyError
from sqlalchemy.orm import Session

from service.db.base import utcnow
from service.keys.models import ApiKey

log = logging.getLogger(__name__)

WRITE_INTERVAL_S = 60.0  # seconds between two writes of one key's last_used_at
BUSY_WAIT_MS = 50  # SQLite: milliseconds the write waits for the write lock, then skips

SessionOpener = Callable[[], AbstractContextManager[Session]]


class UsageRecorder:
    """Notes key use and writes it out, at most once per `interval_s` per key."""

    def __init__(
        self,
        interval_s: float = WRITE_INTERVAL_S,
        clock: Callable[[], float] = time.monotonic,
    ) -> None:
        self.interval_s = interval_s
        self.clock = clock
        self._lock = threading.Lock()  # guards the two dicts
        self._writing = threading.Lock()  # one write at a time per process
        self._pending: dict[int, datetime] = {}  # key id -> newest unwritten use
        self._written: dict[int, float] = {}  # key id -> clock() of its last write

    def note(self, key_id: int, at: datetime | None = None) -> None:
        """Remember that a key was used (now by default)."""
        with self._lock:
            self._pending[key_id] = at or utcnow()

    def _due(self) -> dict[int, datetime]:
        now = self.clock()
        with self._lock:
            return {
                key_id: used
                for key_id, used in self._pending.items()
                if now - self._written.get(key_id, -float("inf")) >= self.interval_s
            }

    def has_due(self) -> bool:
        """True when some key's use waits to be written and its interval has passed."""
        return bool(self._pending) and bool(self._due())

    def pending(self) -> dict[int, datetime]:
        """The unwritten use of every key (a copy)."""
        with self._lock:
            return dict(self._pending)

    def flush(self, opener: SessionOpener) -> int:
        """Write the due keys' last use in one short transaction; how many were written.

        Another thread already writing, or a busy database, skips the write: the uses stay
        noted for the next try.
        """
        if not self._writing.acquire(blocking=False):
            return 0
        try:
            batch = self._due()
            if not batch:
                return 0
            try:
                with opener() as session:
                    done = write_last_used(session, batch)
            except SQLAlchemyError as exc:
                # Busy (SQLite lock, pool exhausted, lost connection): skip, keep the notes.
                log.info("key use not written, database busy: %s", exc)
                return 0
            now = self.clock()
            with self._lock:
                for key_id in done:
                    self._written[key_id] = now
                    if self._pending.get(key_id) == batch[key_id]:  # no newer use meanwhile
                        del self._pending[key_id]
            return len(done)
        finally:
            self._writing.release()

    def reset(self) -> None:
        """Forget every note (tests)."""
        with self._lock:
            self._pending.clear()
            self._written.clear()


def write_last_used(session: Session, batch: dict[int, datetime]) -> Collection[int]:
    """Store each key's last use unless a newer one is stored; the ids handled.

    PostgreSQL skips keys whose row another transaction holds (a revoke, say); SQLite waits
    at most BUSY_WAIT_MS for the write lock and raises OperationalError after that.
    """
    sqlite = session.get_bind().dialect.name == "sqlite"
    if sqlite:
        conn = session.connection()  # a deferred BEGIN: no write lock taken yet
        normal = conn.exec_driver_sql("PRAGMA busy_timeout").scalar_one()
        conn.exec_driver_sql(f"PRAGMA busy_timeout = {BUSY_WAIT_MS}")
        ids: Collection[int] = list(batch)
    else:
        ids = session.scalars(
            select(ApiKey.id).where(ApiKey.id.in_(batch)).with_for_update(skip_locked=True)
        ).all()
    try:
        for key_id in ids:
            used = batch[key_id]
            session.execute(
                update(ApiKey)
                .where(ApiKey.id == key_id)
                .where(or_(ApiKey.last_used_at.is_(None), ApiKey.last_used_at < used))
                .values(last_used_at=used)
                .execution_options(synchronize_session=False)
            )
    finally:
        if sqlite:
            conn.exec_driver_sql(f"PRAGMA busy_timeout = {int(normal)}")
    return ids


recorder = UsageRecorder()
