"""Completion bodies and line summaries, without a database."""

from __future__ import annotations

import pytest
from pydantic import ValidationError

from service.workorders.models import LineOutcome
from service.workorders.schemas import CompleteBody
from service.workorders.service import _summary


def test_skipped_position_needs_a_reason() -> None:
    with pytest.raises(ValidationError) as exc:
        CompleteBody.model_validate({"positions": [{"position_id": 1, "outcome": "skipped"}]})
    assert exc.value.errors()[0]["loc"] == ("positions", 0)


def test_unknown_position_outcome_is_refused() -> None:
    with pytest.raises(ValidationError):
        CompleteBody.model_validate({"positions": [{"position_id": 1, "outcome": "burning"}]})


def test_per_fixture_form_still_parses() -> None:
    body = CompleteBody.model_validate({"outcomes": [{"fixture_id": 3, "outcome": "replaced"}]})
    assert body.positions == [] and body.outcomes[0].fixture_id == 3


def test_line_summary() -> None:
    assert _summary([(1, "replaced", None), (2, "found_dark", None)]) == ("replaced", None)
    assert _summary([(1, "skipped", "no lift"), (2, "skipped", "no lift")]) == (
        LineOutcome.SKIPPED,
        "no lift",
    )
    assert _summary([(1, "found_dark", None), (2, "skipped", "socket")]) == (
        LineOutcome.PARTIAL,
        "socket",
    )


def test_position_results_are_the_line_outcomes_but_partial() -> None:
    from typing import get_args

    from service.workorders.schemas import PositionResult

    assert set(get_args(PositionResult)) == set(LineOutcome) - {LineOutcome.PARTIAL}
