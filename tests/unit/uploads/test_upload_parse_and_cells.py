"""The pipeline's parser and cell readers without a database: rules, row numbers, wording."""

from __future__ import annotations

from datetime import UTC, date, datetime

import numpy as np
import pytest

from service.api.errors import Invalid, TooLarge
from service.uploads import cells
from service.uploads.errors import RowErrors, UnsupportedMediaType
from service.uploads.parse import Columns, RawBody, UploadSpec, columns_from_dicts, read_upload

SPEC = UploadSpec(columns=("a", "b", "c"), required=("a",))


def csv(text: str) -> Columns:
    """Parse CSV text with SPEC."""
    return read_upload(RawBody(text.encode(), "text/csv"), SPEC)


def errors_of(call: object) -> list[dict[str, object]]:
    """The row errors of an Invalid raised by call()."""
    with pytest.raises(Invalid) as info:
        call()  # type: ignore[operator]
    return info.value.errors or []


def test_columns_and_row_numbers_skip_blank_lines() -> None:
    c = csv("a,b,c\n1, x ,\n\n , ,\n3,,z\n")
    assert c.numbers.tolist() == [2, 5]
    assert c.get("a") == ["1", "3"] and c.get("b") == ["x", None] and c.get("c") == [None, "z"]
    assert c.given("b").tolist() == [True, False]
    assert c.row(1) == {"a": "3", "c": "z"}


def test_columns_left_out_read_as_blank() -> None:
    c = csv("a\n1\n2\n")
    assert c.get("b") == [None, None] and not c.given("b").any()


def test_every_short_or_long_row_is_named() -> None:
    errs = errors_of(lambda: csv("a,b,c\n1,2,3\n1,2\n1,2,3,4\n1\n"))
    assert errs == [
        {
            "row": 3,
            "field": None,
            "in": "body",
            "message": "the row has 2 cells but the header has 3 columns",
        },
        {
            "row": 4,
            "field": None,
            "in": "body",
            "message": "the row has 4 cells but the header has 3 columns",
        },
        {
            "row": 5,
            "field": None,
            "in": "body",
            "message": "the row has 1 cells but the header has 3 columns",
        },
    ]


def test_header_rules() -> None:
    errs = errors_of(lambda: csv("b,b,,zz\n1,2,3,4\n"))
    assert {(e["field"], e["message"]) for e in errs} == {
        ("a", "required column is missing from the header"),
        ("b", "column named twice"),
        (None, "a header cell is empty"),
        ("zz", "unknown column; expected some of: a, b, c"),
    }
    assert all(e["row"] == 1 for e in errs)


def test_bom_media_types_and_empty_bodies() -> None:
    body = "\ufeffa,b\n1,2\n".encode()
    assert read_upload(RawBody(body, "text/csv; charset=utf-8"), SPEC).get("a") == ["1"]
    assert read_upload(RawBody(body, "application/csv"), SPEC).get("b") == ["2"]
    js = '\ufeff[{"a": " 1 ", "b": 2}]'.encode()
    c = read_upload(RawBody(js, "application/vnd.x+json"), SPEC)
    assert c.get("a") == ["1"] and c.get("b") == [2] and c.numbers.tolist() == [1]
    with pytest.raises(UnsupportedMediaType):
        read_upload(RawBody(body, "application/xml"), SPEC)
    with pytest.raises(Invalid, match="CSV upload is empty"):
        read_upload(RawBody(b"\xef\xbb\xbf\r\n", "text/csv"), SPEC)
    with pytest.raises(Invalid, match="JSON upload is empty"):
        read_upload(RawBody(b"  ", "application/json"), SPEC)
    with pytest.raises(Invalid, match="must be UTF-8"):
        read_upload(RawBody(b"a\n\xff\n", "text/csv"), SPEC)


def test_json_shape_errors_are_numbered() -> None:
    raw = b'[{"a": 1}, 5, {"a": 2, "zz": 1}]'
    errs = errors_of(lambda: read_upload(RawBody(raw, "application/json"), SPEC))
    assert errs == [
        {"row": 2, "field": None, "in": "body", "message": "each row must be a JSON object"},
        {"row": 3, "field": "zz", "in": "body", "message": "unknown field"},
    ]


def test_size_limit(monkeypatch: pytest.MonkeyPatch) -> None:
    from service.config import get_settings

    monkeypatch.setattr(get_settings(), "max_bulk_rows", 2)
    with pytest.raises(TooLarge):
        csv("a\n1\n2\n3\n")
    with pytest.raises(TooLarge):
        read_upload(RawBody(b'[{"a":1},{"a":2},{"a":3}]', "application/json"), SPEC)


def test_floats_fast_and_slow_paths_name_bad_rows() -> None:
    c = columns_from_dicts([{"a": "1.5"}, {"a": None}, {"a": "2e3"}], ["a"])
    e = RowErrors()
    assert np.array_equal(cells.floats(c, "a", e), [1.5, np.nan, 2000.0], equal_nan=True)
    assert not e
    c = columns_from_dicts(
        [{"a": "x"}, {"a": 3}, {"a": True}, {"a": "nan"}, {"a": "inf"}, {"a": None}], ["a"]
    )
    e = RowErrors()
    out = cells.floats(c, "a", e, required=True)
    assert np.isnan(out[[0, 2, 3, 4, 5]]).all() and out[1] == 3.0
    assert [(i["row"], i["message"]) for i in e.items] == [
        (1, "must be a number, not 'x'"),
        (3, "must be a number, not 'true'"),
        (4, "must be a finite number"),
        (5, "must be a finite number"),
        (6, "is required"),
    ]


def test_numbers_with_ranges_ints_and_ids() -> None:
    c = columns_from_dicts([{"a": "0.5"}, {"a": "5"}, {"a": "2.5"}, {"a": "99"}], ["a"])
    e = RowErrors()
    x = cells.floats(c, "a", e, lo=1, hi=10, out_of_range="must lie in [1, 10] volts")
    assert [i["row"] for i in e.items] == [1, 4] and np.isnan(x[0]) and x[1] == 5.0
    e = RowErrors()
    assert cells.ints(c, "a", e, lo=1, hi=64, default=1).tolist() == [1, 5, 1, 1]
    assert [i["message"] for i in e.items] == [
        "must be a whole number",
        "must be a whole number",
        "must lie in [1, 64]",
    ]
    e = RowErrors()
    assert cells.ids(c, "a", e).tolist() == [-1, 5, -1, 99]
    assert {i["message"] for i in e.items} == {"must be a positive whole number"}


def test_booleans_are_read_once_here() -> None:
    words = ["TRUE", "yes", "Y", "t", "1", "false", "No", "n", "F", "0", True, False, None]
    c = columns_from_dicts([{"a": w} for w in words], ["a"])
    e = RowErrors()
    assert cells.optional_bools(c, "a", e) == [True] * 5 + [False] * 5 + [True, False, None]
    assert not e
    c = columns_from_dicts([{"a": "maybe"}, {"a": 2}], ["a"])
    e = RowErrors()
    assert cells.bools(c, "a", e).tolist() == [False, False]
    assert [i["message"] for i in e.items] == ["must be true or false"] * 2


def test_naive_time_rule_and_dst_gap() -> None:
    rows = [
        {"t": "2025-07-01T12:00:00"},
        {"t": "2025-07-01T12:00:00"},
        {"t": "2025-07-01T12:00:00+02:00"},
    ]
    c = columns_from_dicts(rows, ["t"])
    e = RowErrors()
    # Europe/Lisbon is UTC+1 in July, Asia/Tokyo UTC+9 (IANA tz database); None: UTC.
    got = cells.timestamps(c, "t", e, ["Europe/Lisbon", None, "Asia/Tokyo"])
    want = [datetime(2025, 7, 1, h, tzinfo=UTC).timestamp() for h in (11, 12, 10)]
    assert got.tolist() == want and not e
    assert cells.datetimes(c, "t", e)[0] == datetime(2025, 7, 1, 12, tzinfo=UTC)
    gap = columns_from_dicts([{"t": "2025-03-30T01:30:00"}, {"t": "noon"}], ["t"])
    e = RowErrors()
    assert np.isnan(cells.timestamps(gap, "t", e, ["Europe/Lisbon", None])).all()
    assert [i["message"] for i in e.items] == [
        "2025-03-30T01:30:00 does not exist in Europe/Lisbon (the clocks skip it); give a UTC offset",
        "must be an ISO 8601 date-time, not 'noon'",
    ]


def test_days_in_a_zone_and_dates() -> None:
    c = columns_from_dicts([{"d": "2025-03-30"}, {"d": "2025-13-01"}, {"d": "1800-01-01"}], ["d"])
    e = RowErrors()
    start, end = cells.days(c, "d", e, ["Europe/Lisbon"] * 3)
    # The spring-forward day in Lisbon has 23 hours.
    assert end[0] - start[0] == 23 * 3600 and np.isnan(start[1:]).all()
    assert [i["message"] for i in e.items] == [
        "must be a date YYYY-MM-DD, not '2025-13-01'",
        "must lie in years 1900-2199",
    ]
    e = RowErrors()
    assert cells.dates(c, "d", e)[0] == date(2025, 3, 30)


def test_text_choices_and_json_cells() -> None:
    c = columns_from_dicts(
        [{"a": "abcd", "k": "x", "j": "[[0, 1]]"}, {"a": None, "k": "bad", "j": "[oops"}],
        ["a", "k", "j"],
    )
    e = RowErrors()
    assert cells.texts(c, "a", e, max_len=3, required=True) == ["abcd", None]
    assert cells.choices(c, "k", e, ("x", "y")) == ["x", None]
    assert cells.json_values(c, "j", e, "[[0, 1]]") == [[[0, 1]], None]
    assert [(i["row"], i["field"], i["message"]) for i in e.items] == [
        (1, "a", "is longer than 3 characters"),
        (2, "a", "is required"),
        (2, "k", "must be one of: x, y"),
        (2, "j", "must be JSON, e.g. [[0, 1]]"),
    ]
