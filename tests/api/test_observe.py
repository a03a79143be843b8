"""X-Request-ID, the JSON access log line and /metrics (prometheus-client's text format)."""

from __future__ import annotations

import json
import logging
from collections.abc import Iterator

import pytest
from fastapi import FastAPI
from fastapi.testclient import TestClient
from prometheus_client.parser import text_string_to_metric_families
from sqlalchemy.orm import Session, sessionmaker

from service.api.observe import JsonFormatter
from service.config import get_settings
from service.db.session import get_session
from service.main import create_app
from service.scheduling.runner import run_site_week
from tests.scheduling.faults import fail_before_lines
from tests.scheduling.test_weekly_run import portfolio


def samples(text: str) -> dict[tuple[str, frozenset[tuple[str, str]]], float]:
    """Every sample of a scrape, keyed by name and labels."""
    out = {}
    for family in text_string_to_metric_families(text):
        for s in family.samples:
            out[(s.name, frozenset(s.labels.items()))] = s.value
    return out


def value(text: str, name: str, **labels: str) -> float:
    """One sample's value (0 when absent)."""
    return samples(text).get((name, frozenset(labels.items())), 0.0)


def test_request_id_is_echoed_made_or_replaced(client: TestClient, reader: dict[str, str]) -> None:
    given = client.get("/api/v1/sites", headers={**reader, "X-Request-ID": "cmms-42.a"})
    assert given.headers["x-request-id"] == "cmms-42.a"
    made = client.get("/api/v1/sites", headers=reader).headers["x-request-id"]
    assert len(made) == 32 and int(made, 16) >= 0
    # An id that could forge a log line or run long is replaced, not echoed.
    for bad in ("a b", "x" * 129, 'q"uote'):
        got = client.get("/api/v1/sites", headers={**reader, "X-Request-ID": bad})
        assert got.headers["x-request-id"] != bad and len(got.headers["x-request-id"]) == 32


def test_problem_bodies_carry_the_request_id(client: TestClient, reader: dict[str, str]) -> None:
    missing = client.get("/api/v1/sites/999999", headers={**reader, "X-Request-ID": "r-404"})
    assert missing.status_code == 404 and missing.json()["request_id"] == "r-404"
    # Refused by the gate, before any route: the id is there too.
    nokey = client.get("/api/v1/sites", headers={"X-Request-ID": "r-401"})
    assert nokey.status_code == 401 and nokey.json()["request_id"] == "r-401"
    invalid = client.get("/api/v1/sites?limit=0", headers={**reader, "X-Request-ID": "r-422"})
    assert invalid.status_code == 422 and invalid.json()["request_id"] == "r-422"


def test_one_access_line_per_request_with_template_and_key_id(
    client: TestClient, reader: dict[str, str], caplog: pytest.LogCaptureFixture
) -> None:
    secret = reader["Authorization"].split()[1]
    key_id = client.get("/api/v1/sites", headers=reader)  # warm: nothing to assert yet
    assert key_id.status_code == 200
    with caplog.at_level(logging.INFO, logger="lampkeeper.access"):
        caplog.clear()
        client.get("/api/v1/sites/123456?", headers={**reader, "X-Request-ID": "line-1"})
    lines = [r for r in caplog.records if r.name == "lampkeeper.access"]
    assert len(lines) == 1
    rec = lines[0]
    assert (rec.method, rec.route, rec.status) == ("GET", "/api/v1/sites/{site_id}", 404)  # type: ignore[attr-defined]
    assert isinstance(rec.key_id, int) and rec.duration_ms >= 0  # type: ignore[attr-defined]
    out = JsonFormatter().format(rec)
    assert "\n" not in out and secret not in out
    parsed = json.loads(out)
    assert parsed["route"] == "/api/v1/sites/{site_id}" and parsed["status"] == 404
    assert parsed["message"] == "GET /api/v1/sites/{site_id} 404"
    assert "123456" not in out  # the template, never the path with its ids


def test_metrics_need_a_read_key_and_count_by_template(
    client: TestClient, reader: dict[str, str]
) -> None:
    assert client.get("/metrics").status_code == 401
    before = client.get("/metrics", headers=reader)
    assert before.status_code == 200 and before.headers["content-type"].startswith("text/plain")
    labels = {"method": "GET", "route": "/api/v1/sites/{site_id}", "status": "404"}
    n0 = value(before.text, "lampkeeper_http_requests_total", **labels)
    for site_id in (900001, 900002, 900003):
        assert client.get(f"/api/v1/sites/{site_id}", headers=reader).status_code == 404
    after = client.get("/metrics", headers=reader).text
    assert value(after, "lampkeeper_http_requests_total", **labels) == n0 + 3
    count = "lampkeeper_http_request_duration_seconds_count"
    assert value(after, count, **labels) >= 3
    # Ids never become labels (a float value may hold the digits, so look at labels only).
    label_values = {v for _, labels in samples(after) for _, v in labels}
    assert not any("90000" in v for v in label_values)
    # The pool gauges are read at scrape time from the process engine.
    assert any(name.startswith("lampkeeper_db_pool_") for name, _ in samples(after))


@pytest.fixture()
def factory(db: Session) -> sessionmaker[Session]:
    """Run sessions on the test connection (as tests/scheduling/conftest.py)."""
    return sessionmaker(
        bind=db.get_bind(), expire_on_commit=False, join_transaction_mode="create_savepoint"
    )


def test_weekly_runs_are_counted_by_outcome(
    db: Session, factory: sessionmaker[Session], client: TestClient, reader: dict[str, str]
) -> None:
    def scrape() -> str:
        return client.get("/metrics", headers=reader).text

    start = scrape()
    p = portfolio(db)
    with fail_before_lines(factory, "injected failure"):
        assert run_site_week(factory, p["site"].id).outcome == "failed"
    assert run_site_week(factory, p["site"].id).outcome == "succeeded"
    end = scrape()
    for outcome in ("failed", "succeeded"):
        runs = value(end, "lampkeeper_weekly_runs_total", outcome=outcome)
        assert runs == value(start, "lampkeeper_weekly_runs_total", outcome=outcome) + 1
        durations = "lampkeeper_weekly_run_duration_seconds_count"
        assert (
            value(end, durations, outcome=outcome) == value(start, durations, outcome=outcome) + 1
        )
    made = "lampkeeper_weekly_run_orders_created_total"
    assert value(end, made) == value(start, made) + 2


@pytest.fixture()
def public_app(monkeypatch: pytest.MonkeyPatch) -> Iterator[FastAPI]:
    """An app built with LAMPKEEPER_METRICS_PUBLIC=true."""
    monkeypatch.setenv("LAMPKEEPER_METRICS_PUBLIC", "true")
    get_settings.cache_clear()
    try:
        yield create_app(start_scheduler=False)
    finally:
        monkeypatch.undo()
        get_settings.cache_clear()


def test_metrics_open_only_when_the_setting_allows(public_app: FastAPI, db: Session) -> None:
    def session_override() -> Iterator[Session]:
        yield db

    public_app.dependency_overrides[get_session] = session_override
    with TestClient(public_app) as c:
        answer = c.get("/metrics")
    assert answer.status_code == 200 and "lampkeeper_http_requests_total" in answer.text
