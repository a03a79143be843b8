"""DELETE of a site, area or fixture with history is refused (409) and keeps every row."""

from __future__ import annotations

from datetime import timedelta

from fastapi.testclient import TestClient
from sqlalchemy import func, select
from sqlalchemy.orm import Session

from service.db.base import Base
from service.register.models import Fixture, LampPosition
from tests import factories as fx


def _row_counts(db: Session) -> dict[str, int]:
    return {
        t.name: int(db.scalar(select(func.count()).select_from(t)) or 0)
        for t in Base.metadata.sorted_tables
    }


def test_delete_with_history_is_409_and_keeps_rows(
    db: Session, client: TestClient, writer: dict[str, str]
) -> None:
    s = fx.site(db)
    a = fx.area(db, s)
    lt = fx.lamp_type(db)
    fx.fixtures(db, a, lt, 2)
    db.commit()
    pos = db.scalars(select(LampPosition).order_by(LampPosition.id)).first()
    assert pos is not None
    r = client.post(
        "/api/v1/burnout-reports",
        json={"position_id": pos.id, "reported_at": (fx.T0 + timedelta(days=10)).isoformat()},
        headers=writer,
    )
    assert r.status_code == 201, r.text
    before = _row_counts(db)
    for path in (
        f"/api/v1/fixtures/{pos.fixture_id}",
        f"/api/v1/areas/{a.id}",
        f"/api/v1/sites/{s.id}",
    ):
        r = client.delete(path, headers=writer)
        assert r.status_code == 409, (path, r.text)
        assert r.headers["content-type"].startswith("application/problem+json")
        assert "1 burnout reports" in r.json()["detail"]
    db.expire_all()
    assert _row_counts(db) == before
    # The other fixture has no history: a hard delete still works.
    other = db.scalars(select(Fixture).where(Fixture.id != pos.fixture_id)).one()
    assert client.delete(f"/api/v1/fixtures/{other.id}", headers=writer).status_code == 204
