"""Schema-driven fuzzing (schemathesis) of every API operation, bounded and derandomized.

Each operation gets a few generated requests from its OpenAPI schema, valid ones and
invalid ones; none may answer 5xx, and every answer must match the documented response
schema, with a status the operation documents (status_code_conformance) and the media
type documented for that status (content_type_conformance: every error is
application/problem+json, service.api.openapi). The full runs that found the defects fixed with test_ids.py, test_times.py,
test_guard.py and the tests/*/test_*_bounds.py files were far longer (tens of thousands
of requests against a served demo database); this one guards against regressions.
"""

from __future__ import annotations

from typing import Any

import pytest
import schemathesis
from fastapi import FastAPI
from fastapi.testclient import TestClient
from hypothesis import HealthCheck, Phase, given, settings
from hypothesis.errors import Unsatisfiable
from schemathesis.checks import not_a_server_error
from schemathesis.generation import GenerationMode
from schemathesis.specs.openapi.checks import (
    content_type_conformance,
    response_schema_conformance,
    status_code_conformance,
)

SKIP = {("DELETE", "/api/v1/keys/{key_id}")}  # revoking the test's own key only yields 401s


@pytest.mark.parametrize("mode", [GenerationMode.POSITIVE, GenerationMode.NEGATIVE])
def test_no_server_error_and_documented_answers(
    app: FastAPI, client: TestClient, admin: dict[str, str], mode: GenerationMode
) -> None:
    # `client` routes every request through the test's rolled-back session.
    schema = schemathesis.openapi.from_asgi("/openapi.json", app)
    checks = [
        not_a_server_error,
        response_schema_conformance,
        status_code_conformance,
        content_type_conformance,
    ]
    tested = 0
    errors_seen: set[tuple[int, str]] = set()
    for result in schema.get_all_operations():
        op = result.ok()
        if (op.method.upper(), op.path) in SKIP or not op.path.startswith("/api/v1/"):
            continue  # the probes answer for the settings' database, not the test's

        @given(case=op.as_strategy(generation_mode=mode))
        @settings(
            max_examples=3,
            derandomize=True,  # the same requests on every run
            deadline=None,
            database=None,
            phases=[Phase.explicit, Phase.generate],
            suppress_health_check=list(HealthCheck),
        )
        def run(case: Any) -> None:
            response = case.call(headers=admin)
            if response.status_code >= 400:
                media = response.headers.get("content-type", [""])
                errors_seen.add((response.status_code, str(media)))
            case.validate_response(response, checks=checks)

        try:
            run()
        except Unsatisfiable:  # nothing to make invalid: no parameters and no body
            assert mode is GenerationMode.NEGATIVE
            continue
        tested += 1
    assert tested >= 50  # the routes of the API, not a silently empty schema
    assert errors_seen, "the run met no error answer at all"
    assert {media for _, media in errors_seen} <= {"['application/problem+json']"}
