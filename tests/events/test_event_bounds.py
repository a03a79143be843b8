"""Burnout reports and removals with impossible numbers: a 422 naming the field, no write.

Found by hand after fuzzing: burn_hours had no upper bound, and JSON's 1e400 (read as inf)
or 1e308 was stored as a lamp's hours, feeding infinite hours to the field fit.
"""

from __future__ import annotations

import pytest
from fastapi.testclient import TestClient
from sqlalchemy.orm import Session

from tests import factories as fx
from tests.api.test_bad_input_tour import assert_problem, error_fields, table_counts


@pytest.mark.parametrize("literal", ["1e400", "1e308", "NaN", "-Infinity", "2000000"])
@pytest.mark.parametrize("path", ["/api/v1/burnout-reports", "/api/v1/lamp-removals"])
def test_burn_hours_out_of_range(
    client: TestClient, db: Session, writer: dict[str, str], path: str, literal: str
) -> None:
    _, _, _, fixtures = fx.two_fixture_area(db)
    pos = fixtures[0].positions[0].id
    when = "reported_at" if "burnout" in path else "removed_at"
    extra = "" if "burnout" in path else ', "failed": true, "reason": "burnout"'
    raw = f'{{"position_id": {pos}, "{when}": "{fx.iso_days(30)}", "burn_hours": {literal}{extra}}}'
    before = table_counts(db)
    r = client.post(
        path, content=raw.encode(), headers={**writer, "content-type": "application/json"}
    )
    assert error_fields(assert_problem(r, 422)) == {"burn_hours"}
    assert table_counts(db) == before
