"""The feed never skips a change a slower concurrent transaction commits after a faster one.

Two writer processes on PostgreSQL: one opens its transaction and writes, the other writes
and commits while the first is still open, a reader polls the feed in between, then the
first commits. Every change must be read exactly once, whatever the order of the
transaction ids. (A feed paged by a bare sequence id skips the slow writer's row here.)
"""

from __future__ import annotations

import subprocess
import sys
import time
from pathlib import Path
from typing import Any

import pytest
from fastapi.testclient import TestClient

ROOT = Path(__file__).resolve().parents[2]


class Writer:
    """A slow_writer process, stepped through its writes."""

    def __init__(self, url: str, *names: str) -> None:
        self.proc = subprocess.Popen(
            [sys.executable, "-m", "tests.changes.slow_writer", url, *names],
            cwd=ROOT,
            stdin=subprocess.PIPE,
            stdout=subprocess.PIPE,
            text=True,
        )

    def step(self) -> str:
        """Let it do its next write (or the commit) and wait until it has."""
        assert self.proc.stdin is not None and self.proc.stdout is not None
        self.proc.stdin.write("go\n")
        self.proc.stdin.flush()
        return self.proc.stdout.readline().strip()

    def close(self) -> None:
        """Wait for the process to end."""
        self.proc.wait(timeout=30)
        assert self.proc.returncode == 0


def read_all(
    client: TestClient, headers: dict[str, str], after: str | None, at_least: int = 0
) -> tuple[list[Any], str | None]:
    """Every site change visible after a cursor, and the cursor to continue from.

    With `at_least`, polls (up to 60 s) until that many arrived: on PostgreSQL a commit
    shows once every older transaction of the cluster (any database) has finished.
    """
    deadline = time.monotonic() + 60
    items, cursor = _read_all(client, headers, after)
    while len(items) < at_least and time.monotonic() < deadline:
        time.sleep(0.2)
        more, cursor = _read_all(client, headers, cursor)
        items += more
    return items, cursor


def _read_all(
    client: TestClient, headers: dict[str, str], after: str | None
) -> tuple[list[Any], str | None]:
    items: list[Any] = []
    while True:
        params: dict[str, Any] = {"limit": 2, "types": "site"}
        if after:
            params["after"] = after
        r = client.get("/api/v1/changes", params=params, headers=headers)
        assert r.status_code == 200, r.text
        page = r.json()
        items += page["items"]
        after = page["next_cursor"]
        if not page["has_more"]:
            return items, after


def names(items: list[Any]) -> list[str]:
    """The site names in a list of changes."""
    return [c["body"]["name"] for c in items]


def start_cursor(client: TestClient, headers: dict[str, str]) -> str | None:
    """The cursor after everything visible now."""
    return read_all(client, headers, None)[1]


@pytest.mark.postgres_only
@pytest.mark.parametrize("slow_first", [True, False])
def test_slow_writer_is_not_skipped(
    live: TestClient, live_admin: dict[str, str], live_url: str, slow_first: bool
) -> None:
    tag = "a" if slow_first else "b"
    after = start_cursor(live, live_admin)
    slow = Writer(live_url, f"slow-1-{tag}", f"slow-2-{tag}")
    fast = Writer(live_url, f"fast-{tag}")
    try:
        if slow_first:  # the slow transaction takes the older transaction id
            assert slow.step() == f"wrote slow-1-{tag}"
            assert fast.step() == f"wrote fast-{tag}"
        else:  # the fast one does
            assert fast.step() == f"wrote fast-{tag}"
            assert slow.step() == f"wrote slow-1-{tag}"
        assert fast.step() == "committed"
        first, after = read_all(live, live_admin, after)
        if not slow_first:
            # Visible once every older transaction of the cluster has finished: poll.
            deadline = time.monotonic() + 60
            while not first and time.monotonic() < deadline:
                time.sleep(0.2)
                first, after = read_all(live, live_admin, after)
        # The slow writer's later row gets a higher change id than the fast commit's.
        assert slow.step() == f"wrote slow-2-{tag}"
        second, after = read_all(live, live_admin, after)
        assert slow.step() == "committed"
        # Poll for the rest: a transaction of another database of the cluster may hold the
        # horizon between the two commits for a while (shown later, never skipped).
        third, after = read_all(live, live_admin, after, at_least=3 - len(first + second))
    finally:
        slow.close()
        fast.close()
    seen = names(first) + names(second) + names(third)
    assert sorted(seen) == sorted([f"slow-1-{tag}", f"slow-2-{tag}", f"fast-{tag}"])
    assert f"slow-1-{tag}" not in names(first) + names(second)  # uncommitted: not shown
    if slow_first:
        # The fast commit waits behind the still-open older transaction.
        assert names(first) == []
    else:
        assert names(first) in ([f"fast-{tag}"], [])  # [] while another database's writer runs
    ids = [c["id"] for c in first + second + third]
    assert len(ids) == len(set(ids))  # none repeated
    assert read_all(live, live_admin, after)[0] == []  # and nothing more afterwards
