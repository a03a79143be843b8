"""Keys found active, trusted for `key_cache_s` seconds without asking the database again.

The gate, the Idempotency-Key middleware and the route's scope check each need the
caller's key; under load that was three lookups per request. A hit costs a dict read.
A revoke in this process forgets the key at once (`forget`); another worker process
keeps trusting it until its entry is `key_cache_s` old: that is the documented bound.
"""

from __future__ import annotations

import threading
import time
from collections.abc import Callable
from contextlib import AbstractContextManager
from dataclasses import dataclass

from sqlalchemy.orm import Session

MAX_ENTRIES = 10_000  # a flood of distinct keys cannot grow the cache without bound


@dataclass(frozen=True)
class ActiveKey:
    """What a request needs of its key: who it is and what it may do."""

    id: int
    name: str
    scope: str


class KeyCache:
    """Key digest -> (time found, ActiveKey), guarded by a lock (routes run in threads)."""

    def __init__(self) -> None:
        self._lock = threading.Lock()
        self._rows: dict[str, tuple[float, ActiveKey]] = {}

    def get(self, digest: str, ttl_s: float) -> ActiveKey | None:
        """The key if it was found active less than `ttl_s` seconds ago."""
        with self._lock:
            hit = self._rows.get(digest)
        if hit is None or time.monotonic() - hit[0] >= ttl_s:
            return None
        return hit[1]

    def put(self, digest: str, key: ActiveKey) -> None:
        """Remember a key just found active."""
        with self._lock:
            if len(self._rows) >= MAX_ENTRIES:
                self._rows.clear()
            self._rows[digest] = (time.monotonic(), key)

    def forget(self, key_id: int) -> None:
        """Drop a key (revoked in this process)."""
        with self._lock:
            for d in [d for d, (_, k) in self._rows.items() if k.id == key_id]:
                del self._rows[d]

    def clear(self) -> None:
        """Drop everything."""
        with self._lock:
            self._rows.clear()


cache = KeyCache()

SessionOpener = Callable[[], AbstractContextManager[Session]]
