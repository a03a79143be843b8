"""Bulk JSON uploads nested thousands deep: a 422, not a RecursionError (a 500)."""

from __future__ import annotations

import pytest
from fastapi.testclient import TestClient
from sqlalchemy.orm import Session

from tests.api.test_bad_input_tour import assert_problem, table_counts

DEEP = b"[" * 100_000 + b"]" * 100_000


@pytest.mark.parametrize(
    "url",
    [
        "/api/v1/voltage-readings/bulk",
        "/api/v1/burn-hours/bulk",
        "/api/v1/lamp-types/import",
        "/api/v1/fixtures/import",
    ],
)
def test_deeply_nested_json(
    client: TestClient, db: Session, writer: dict[str, str], url: str
) -> None:
    before = table_counts(db)
    r = client.post(url, content=DEEP, headers={**writer, "content-type": "application/json"})
    assert "nested too deeply" in assert_problem(r, 422)["detail"]
    assert table_counts(db) == before
