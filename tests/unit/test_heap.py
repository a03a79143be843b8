"""The collector freeze: a job's span hands the heap back, a served app's start-up freeze stays."""

from __future__ import annotations

import gc

import pytest

from service import heap


def test_a_span_freezes_then_hands_back(monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.setattr(heap, "_startup_frozen", False)
    monkeypatch.setattr(heap, "_runs", 0)
    gc.unfreeze()  # nothing frozen to start with (as on the command line)
    with heap.long_lived_frozen():
        assert gc.get_freeze_count() > 0
        with heap.long_lived_frozen():  # a second site's run in another thread
            pass
        assert gc.get_freeze_count() > 0  # the outer span is still open
    assert gc.get_freeze_count() == 0


def test_a_served_apps_start_up_freeze_outlives_a_run(monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.setattr(heap, "_startup_frozen", False)
    monkeypatch.setattr(heap, "_runs", 0)
    heap.freeze_startup()
    frozen = gc.get_freeze_count()
    assert frozen > 0
    with heap.long_lived_frozen():
        pass
    assert gc.get_freeze_count() >= frozen  # the run did not unfreeze the app's heap
    heap.freeze_startup()  # once per process: a second call changes nothing
    assert gc.get_freeze_count() >= frozen
