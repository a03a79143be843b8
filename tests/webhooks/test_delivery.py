"""Deliveries to a real HTTP receiver on loopback: signed, retried, leased, paused.

Runs on the module's committed database (tests/changes/live.py): the worker's claims and
records are their own transactions, as in production.
"""

from __future__ import annotations

import json
import random
import threading
import time
from datetime import timedelta
from typing import Any

import httpx
import pytest
from fastapi.testclient import TestClient
from sqlalchemy import select, update
from sqlalchemy.orm import Session, sessionmaker

from service.config import get_settings
from service.db.base import utcnow
from service.db.session import begin_write
from service.webhooks.models import WebhookAttempt, WebhookDelivery, WebhookSubscription
from service.webhooks.worker import Deliverer, backoff_s, claim, fan_out, new_owner
from tests.changes.slow_writer import site
from tests.webhooks.receiver import Receiver
from tests.webhooks.test_signing import readme_verify


def add_sites(factory: sessionmaker[Session], *names: str) -> None:
    """Commit new sites (each a 'created' change)."""
    with factory() as s:
        begin_write(s)
        s.add_all([site(n) for n in names])
        s.commit()


def deliver_until(worker: Deliverer, rec: Receiver, n: int, **kw: Any) -> None:
    """Run passes until the receiver got `n` POSTs (PostgreSQL shows a commit once every
    older transaction of the cluster finished, so the first pass may see nothing)."""
    deadline = time.monotonic() + 60
    while len(rec.got) < n and time.monotonic() < deadline:
        worker.run_pass(**kw)
        if len(rec.got) < n:
            time.sleep(0.1)
    assert len(rec.got) >= n


def queue(factory: sessionmaker[Session], n: int) -> int:
    """Fan out (no delivery) until `n` deliveries are queued or 60 s pass; how many were."""
    deadline, queued = time.monotonic() + 60, 0
    while queued < n and time.monotonic() < deadline:
        with factory() as s:
            begin_write(s)
            queued += fan_out(s)
            s.commit()
        if queued < n:
            time.sleep(0.1)
    return queued


def attempts(factory: sessionmaker[Session], sub_id: int) -> list[WebhookAttempt]:
    """The subscription's delivery log, oldest first."""
    with factory() as s:
        stmt = select(WebhookAttempt).where(WebhookAttempt.subscription_id == sub_id)
        return list(s.scalars(stmt.order_by(WebhookAttempt.id)))


def test_signed_delivery_verifies_with_the_readme_snippet(
    live_factory: sessionmaker[Session], rec: Receiver, subscription: dict[str, Any]
) -> None:
    worker = Deliverer(live_factory)
    try:
        add_sites(live_factory, "Hook One")
        deliver_until(worker, rec, 1)
    finally:
        worker.close()
    got = rec.got[0]
    assert readme_verify()(subscription["secret"], got.headers, got.body)
    payload = json.loads(got.body)
    assert payload["type"] == "site.created"
    assert payload["change"]["body"]["name"] == "Hook One"
    assert (
        got.headers["x-lampkeeper-event-id"] == payload["event_id"] == str(payload["change"]["id"])
    )
    log = attempts(live_factory, subscription["id"])
    assert [(a.status_code, a.outcome) for a in log] == [(200, "delivered")]


def test_retries_after_500_and_after_a_timeout(
    live_factory: sessionmaker[Session], rec: Receiver, subscription: dict[str, Any]
) -> None:
    rec.plan = [(500, 0.0), (200, 1.5)]  # then a reply slower than the client's timeout
    worker = Deliverer(live_factory, httpx.Client(timeout=0.5))
    try:
        add_sites(live_factory, "Hook Retry")
        deliver_until(worker, rec, 1)
        log = attempts(live_factory, subscription["id"])
        assert [(a.status_code, a.outcome) for a in log] == [(500, "retry")]
        with live_factory() as s:
            d = s.scalars(
                select(WebhookDelivery).where(WebhookDelivery.id == log[0].delivery_id)
            ).one()
            wait = (d.next_attempt_at - log[0].started_at).total_seconds()
        base = get_settings().webhook_retry_base_s
        assert 0.5 * base - 1 <= wait <= base + 1  # first back-off: 50-100% of the base
        assert worker.run_pass().claimed == 0  # not due yet
        later = utcnow() + timedelta(seconds=base + 1)
        deliver_until(worker, rec, 2, now=later)  # times out
        deliver_until(worker, rec, 3, now=later + timedelta(seconds=4 * base))
    finally:
        worker.close()
    log = attempts(live_factory, subscription["id"])
    assert [a.outcome for a in log] == ["retry", "retry", "delivered"]
    assert log[1].status_code is None and "Timeout" in (log[1].error or "")
    bodies = {r.body for r in rec.got}
    assert len(bodies) == 1  # the same event each time (at least once)
    assert [r.headers["x-lampkeeper-attempt"] for r in rec.got] == ["1", "2", "3"]


def test_a_day_of_failures_pauses_the_subscription(
    live: TestClient,
    live_admin: dict[str, str],
    live_factory: sessionmaker[Session],
    rec: Receiver,
    subscription: dict[str, Any],
) -> None:
    rec.plan = [(503, 0.0)] * 2
    worker = Deliverer(live_factory)
    try:
        add_sites(live_factory, "Hook Gone")
        deliver_until(worker, rec, 1)
        day = utcnow() + timedelta(seconds=get_settings().webhook_give_up_s + 60)
        deliver_until(worker, rec, 2, now=day)
        sub = live.get(f"/api/v1/webhooks/{subscription['id']}", headers=live_admin).json()
        assert sub["state"] == "paused" and "failed" in sub["paused_reason"]
        rows = live.get(f"/api/v1/webhooks/{subscription['id']}/deliveries", headers=live_admin)
        failed = rows.json()[0]
        assert failed["state"] == "failed" and failed["attempts"] == 2
        # Paused: redelivered rows wait; resuming sends them.
        url = f"/api/v1/webhooks/{subscription['id']}/deliveries/{failed['id']}/redeliver"
        assert live.post(url, headers=live_admin).status_code == 202
        assert worker.run_pass(now=day).claimed == 0
        r = live.patch(
            f"/api/v1/webhooks/{subscription['id']}", json={"state": "active"}, headers=live_admin
        )
        assert r.status_code == 200
        deliver_until(worker, rec, 3, now=day)
    finally:
        worker.close()
    assert [a.outcome for a in attempts(live_factory, subscription["id"])] == [
        "retry",
        "failed",
        "delivered",
    ]


def test_a_crash_mid_delivery_is_claimed_again_after_the_lease(
    live_factory: sessionmaker[Session], rec: Receiver, subscription: dict[str, Any]
) -> None:
    worker = Deliverer(live_factory)
    try:
        add_sites(live_factory, "Hook Crash")
        assert queue(live_factory, 1) == 1
        now = utcnow()
        with live_factory() as s:  # a worker claims, then dies before its POST
            begin_write(s)
            taken = claim(s, new_owner(), now, 10, get_settings().webhook_lease_s)
            s.commit()
        assert len(taken) == 1
        assert worker.run_pass(now=now, fan=False).claimed == 0  # leased
        after_lease = now + timedelta(seconds=get_settings().webhook_lease_s + 1)
        assert worker.run_pass(now=after_lease, fan=False).claimed == 1
    finally:
        worker.close()
    assert len(rec.got) == 1
    assert json.loads(rec.got[0].body)["change"]["body"]["name"] == "Hook Crash"


def test_two_workers_never_send_one_delivery_twice(
    live_factory: sessionmaker[Session], rec: Receiver, subscription: dict[str, Any]
) -> None:
    n = 40
    add_sites(live_factory, *[f"Hook Pair {i}" for i in range(n)])
    assert queue(live_factory, n) == n
    errors: list[BaseException] = []

    def work() -> None:
        w = Deliverer(live_factory)
        try:
            for _ in range(40):
                if w.run_pass(fan=False).claimed == 0 and len(rec.got) >= n:
                    break
        except BaseException as exc:  # surfaced below
            errors.append(exc)
        finally:
            w.close()

    with pytest.MonkeyPatch.context() as mp:
        mp.setattr(get_settings(), "webhook_batch", 3)  # many small claims, interleaved
        threads = [threading.Thread(target=work) for _ in range(2)]
        for t in threads:
            t.start()
        for t in threads:
            t.join(timeout=120)
    assert errors == []
    event_ids = [r.headers["x-lampkeeper-event-id"] for r in rec.got]
    assert len(event_ids) == n and len(set(event_ids)) == n
    log = attempts(live_factory, subscription["id"])
    assert len(log) == n and {a.outcome for a in log} == {"delivered"}


def test_retry_schedule_spans_about_a_day() -> None:
    # Common practice: capped exponential back-off with jitter (each wait 50-100% of
    # min(cap, base * 2**(n-1))); checked against that closed form with a seeded RNG.
    s = get_settings()
    rng = random.Random(7)
    waits = []
    for n in range(1, 12):
        w = backoff_s(n, rng)
        full = min(s.webhook_retry_cap_s, s.webhook_retry_base_s * 2 ** (n - 1))
        assert 0.5 * full <= w <= full
        waits.append(w)
    assert waits[-1] <= s.webhook_retry_cap_s
    # Attempts until give-up: the sum of waits passes webhook_give_up_s (a day) after
    # roughly 24-48 attempts at the 1 h cap with 50-100% jitter.
    total, n = 0.0, 0
    rng = random.Random(11)
    while total < s.webhook_give_up_s:
        n += 1
        total += backoff_s(n, rng)
    assert 20 <= n <= 50


def test_paused_subscription_is_not_fanned_out(
    live_factory: sessionmaker[Session], rec: Receiver, subscription: dict[str, Any]
) -> None:
    with live_factory() as s:
        s.execute(
            update(WebhookSubscription)
            .where(WebhookSubscription.id == subscription["id"])
            .values(state="paused")
        )
        s.commit()
    add_sites(live_factory, "Hook Paused")
    worker = Deliverer(live_factory)
    try:
        assert worker.run_pass().claimed == 0
    finally:
        worker.close()
    assert rec.got == []
