"""A JSON upload can put an array or an object in any cell: a row error, never a crash.

The cached per-cell readers (cells._each: booleans, dates, timestamps) key their cache by the
cell's value; a list or dict has no hash, so it is read uncached and refused with the row
number like any other bad cell (the wording as for a bad text cell of the same column).
"""

from __future__ import annotations

from service.uploads import cells
from service.uploads.errors import RowErrors
from service.uploads.parse import columns_from_dicts

ROWS = [{"a": [1]}, {"a": {"x": 1}}, {"a": "yes"}, {"a": "2024-01-02"}, {"a": "2024-01-02"}]
COLS = columns_from_dicts(ROWS, ("a",))


def _bad_rows(errors: RowErrors) -> list[int]:
    return sorted(item["row"] for item in errors.items)


def test_booleans_refuse_arrays_and_objects() -> None:
    errors = RowErrors()
    assert cells.optional_bools(COLS, "a", errors) == [None, None, True, None, None]
    assert _bad_rows(errors) == [1, 2, 4, 5]
    assert all(item["message"] == "must be true or false" for item in errors.items)


def test_dates_and_timestamps_refuse_arrays_and_objects() -> None:
    errors = RowErrors()
    got = cells.dates(COLS, "a", errors)
    assert got[:3] == [None, None, None]
    assert got[3] == got[4] and got[3] is not None and got[3].isoformat() == "2024-01-02"
    assert _bad_rows(errors) == [1, 2, 3]
    assert errors.items[0]["message"] == "must be a date YYYY-MM-DD, not '[1]'"
    errors = RowErrors()
    stamps = cells.datetimes(COLS, "a", errors)
    assert stamps[:3] == [None, None, None]
    assert stamps[3] is not None and stamps[3].isoformat() == "2024-01-02T00:00:00+00:00"
    assert _bad_rows(errors) == [1, 2, 3]
