"""Every errors[] item names its field and where it was sent (`in`), uploads with their row."""

from __future__ import annotations

import pytest
from pydantic import BaseModel, ValidationError, field_validator

from service.api.errors import LOCATIONS, validation_errors
from service.uploads.errors import RowErrors


class _Lamp(BaseModel):
    """A model a service validates itself (no body/query prefix in its error locations)."""

    rated_life_h: float

    @field_validator("rated_life_h")
    @classmethod
    def _positive(cls, v: float) -> float:
        if v <= 0:
            raise ValueError("must be > 0")
        return v


def test_errors_of_a_model_a_service_validates_are_in_the_body() -> None:
    with pytest.raises(ValidationError) as caught:
        _Lamp.model_validate({"rated_life_h": -1})
    items = validation_errors(list(caught.value.errors()))
    assert [(e["field"], e["in"]) for e in items] == [("rated_life_h", "body")]


def test_request_errors_keep_their_location() -> None:
    raw = [
        {"loc": ("query", "limit"), "msg": "too big", "type": "less_than_equal"},
        {"loc": ("path", "site_id"), "msg": "not an integer", "type": "int_parsing"},
        {"loc": ("body", "sites", 0, "name"), "msg": "missing", "type": "missing"},
    ]
    got = [(e["field"], e["in"]) for e in validation_errors(raw)]
    assert got == [("limit", "query"), ("site_id", "path"), ("sites.0.name", "body")]
    assert {e["in"] for e in validation_errors(raw)} <= set(LOCATIONS)


def test_upload_row_errors_carry_row_field_in_and_message() -> None:
    errors = RowErrors()
    errors.add(3, "rated_life_h", "must be > 0")
    errors.add(2, None, "the row has 2 cells but the header has 3 columns")
    with pytest.raises(Exception) as caught:
        errors.raise_if_any()
    items = caught.value.errors  # type: ignore[attr-defined]
    assert items == [
        {"row": 2, "field": None, "in": "body", "message": errors.items[0]["message"]},
        {"row": 3, "field": "rated_life_h", "in": "body", "message": "must be > 0"},
    ]
