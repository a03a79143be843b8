"""Field-fit curves reused for `field_fit_cache_s` seconds, refitted at once after new removals.

A fit reads every removal and every burning lamp of a lamp type and runs the MLE: under a
mixed load it was most of a forecast's or plan's time, for the same answer each time.
An entry's key holds the lamp type's resolved model (a catalogue edit is a new key) and
its removal counts and newest removal id (a recorded removal, in any process, is a new
key). What the key does not see, burn hours of lamps still burning, reaches the fit
within `field_fit_cache_s` seconds. `clear()` drops everything (tests, after a bulk load).
"""

from __future__ import annotations

import threading
import time
from collections.abc import Callable, Hashable

from service.catalogue.resolved import CurveInUse

MAX_ENTRIES = 4096  # lamp types x model versions; cleared whole when full


class FitCache:
    """(lamp type, model, removal counts) -> (time fitted, curve), guarded by a lock."""

    def __init__(self) -> None:
        self._lock = threading.Lock()
        self._rows: dict[Hashable, tuple[float, CurveInUse]] = {}

    def curve(self, key: Hashable, ttl_s: float, fit: Callable[[], CurveInUse]) -> CurveInUse:
        """The cached curve for `key` if younger than `ttl_s`, else `fit()` stored."""
        if ttl_s <= 0:
            return fit()
        with self._lock:
            hit = self._rows.get(key)
        if hit is not None and time.monotonic() - hit[0] < ttl_s:
            return hit[1]
        value = fit()  # outside the lock: two threads may fit at once, both get the same
        with self._lock:
            if len(self._rows) >= MAX_ENTRIES:
                self._rows.clear()
            self._rows[key] = (time.monotonic(), value)
        return value

    def clear(self) -> None:
        """Drop every entry."""
        with self._lock:
            self._rows.clear()


cache = FitCache()
