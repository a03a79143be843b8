"""The process's long-lived heap, kept from the cyclic garbage collector (stdlib only)."""

from __future__ import annotations

import gc
import threading
from collections.abc import Iterator
from contextlib import contextmanager

# A full (generation 2) collection walks every tracked object; the ~200,000 made by importing
# and building the app (modules, mappers, numpy, scipy) cost 0.2-0.4 s per pass on a shared
# 2-core host, and a heavy page or a site's weekly run sets off several. gc.freeze (Python's
# gc documentation) moves them to the permanent generation; objects made later are
# collected as usual.
_guard = threading.Lock()
_startup_frozen = False
_runs = 0  # work spans inside long_lived_frozen now (threads may run sites side by side)


def freeze_startup() -> None:
    """Hide the objects made at start-up from the collector, once per process."""
    global _startup_frozen
    with _guard:
        if _startup_frozen:
            return
        gc.collect()  # free start-up garbage first, so it is not kept for good
        gc.freeze()
        _startup_frozen = True


@contextmanager
def long_lived_frozen() -> Iterator[None]:
    """During a long job, keep the collector off what the process already held.

    Where the start-up heap is frozen already (the served app) this adds nothing; else
    (the command line, tests) the heap is frozen for the span and handed back after, so the
    job's own garbage is still collected and nothing stays frozen by accident.
    """
    global _runs
    with _guard:
        own = not _startup_frozen
        if own and _runs == 0:
            gc.freeze()
        _runs += own
    try:
        yield
    finally:
        with _guard:
            _runs -= own
            if own and _runs == 0 and not _startup_frozen:
                gc.unfreeze()
