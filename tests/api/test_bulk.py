"""The upload pipeline's parser and cell readers, row errors, and the download writers."""

from __future__ import annotations

import json

import pytest

from service.api.bulk import to_csv, to_json
from service.api.errors import Conflict, Invalid, TooLarge
from service.uploads.cells import CellError, boolean, number, read_date, read_timestamp
from service.uploads.errors import RowErrors, UnsupportedMediaType
from service.uploads.parse import Columns, RawBody, UploadSpec, read_upload

AB = UploadSpec(columns=("a", "b"))


def parse_rows(body: RawBody, columns: tuple[str, ...] = ("a", "b")) -> list[tuple[int, dict]]:
    """(row number, given cells) per row."""
    c: Columns = read_upload(body, UploadSpec(columns=columns))
    return [(int(n), c.row(i)) for i, n in enumerate(c.numbers.tolist())]


def test_csv_rows_are_numbered_as_lines_of_the_file() -> None:
    text = "\ufeffa,b\n1, x \n\n,\n3,\n"
    rows = parse_rows(RawBody(text.encode(), "text/csv"))
    # Line 3 is blank and line 4 has only empty cells: skipped, numbers keep counting.
    assert rows == [(2, {"a": "1", "b": "x"}), (5, {"a": "3"})]


def test_quoted_cells_with_commas_and_quotes() -> None:
    text = 'a,b\n"x, y","say ""hi"""\n'
    (row,) = parse_rows(RawBody(text.encode(), "text/csv; charset=utf-8"))
    assert row[1] == {"a": "x, y", "b": 'say "hi"'}


def test_json_rows_are_numbered_from_one() -> None:
    rows = parse_rows(RawBody(json.dumps([{"a": 1}, {"a": 2}]).encode(), "application/json"))
    assert rows == [(1, {"a": 1}), (2, {"a": 2})]


@pytest.mark.parametrize(
    ("body", "media"),
    [
        (b"a,b\n1,2,3\n", "text/csv"),  # more cells than columns
        (b"a,b\n1\n", "text/csv"),  # fewer cells than columns
        (b"a,a\n1,2\n", "text/csv"),  # a column twice
        (b"a,zz\n1,2\n", "text/csv"),  # unknown column
        (b"", "text/csv"),
        (b"\xff\xfe", "text/csv"),
        (b'{"a": 1}', "application/json"),
        (b"[1, 2]", "application/json"),
        (b'[{"zz": 1}]', "application/json"),
        (b"[", "application/json"),
    ],
)
def test_bad_uploads_are_422(body: bytes, media: str) -> None:
    with pytest.raises(Invalid):
        parse_rows(RawBody(body, media))


def test_other_media_types_are_415() -> None:
    with pytest.raises(UnsupportedMediaType):
        parse_rows(RawBody(b"<a/>", "application/xml"))


def test_row_limit_is_413(monkeypatch: pytest.MonkeyPatch) -> None:
    from service.config import get_settings

    monkeypatch.setattr(get_settings(), "max_bulk_rows", 2)
    with pytest.raises(TooLarge):
        parse_rows(RawBody(b"a\n1\n2\n3\n", "text/csv"), ("a",))


def test_row_errors_cap_sort_and_kind() -> None:
    errors = RowErrors(cap=3)
    for row in (9, 4, 7, 5):
        errors.add(row, "x", "bad")
    with pytest.raises(Invalid) as info:
        errors.raise_if_any()
    exc = info.value
    assert [e["row"] for e in exc.errors or []] == [4, 7, 9]  # first 3 kept, sorted
    assert exc.extra["error_count"] == 4 and exc.extra["bad_rows"] == 4
    clash = RowErrors()
    clash.add(2, "tag", "exists", conflict=True)
    with pytest.raises(Conflict):
        clash.raise_if_any()
    RowErrors().raise_if_any()  # nothing to raise


def test_writers_and_bool_cells() -> None:
    rows = [{"a": [[1, 2]], "b": None, "c": True}]
    assert to_csv(["a", "b", "c"], rows) == 'a,b,c\n"[[1,2]]",,true\n'
    assert json.loads(to_json(["a", "c"], rows)) == [{"a": [[1, 2]], "c": True}]
    assert boolean("Yes") and not boolean("0") and boolean(True)
    with pytest.raises(CellError, match="must be true or false"):
        boolean("maybe")


def test_cell_readers() -> None:
    from datetime import UTC, date, datetime

    assert number("1e3") == 1000.0
    assert read_date("2024-02-29") == date(2024, 2, 29)
    assert read_timestamp("2024-01-01T02:00:00+02:00") == datetime(2024, 1, 1, tzinfo=UTC)
    assert read_timestamp("2024-01-01 00:00") == datetime(2024, 1, 1, tzinfo=UTC)
    # Without an offset: the zone given (a site's), else UTC.
    assert read_timestamp("2024-07-01 12:00", "Europe/Dublin") == datetime(
        2024, 7, 1, 11, tzinfo=UTC
    )
    for call in (
        lambda: number("nan"),
        lambda: number(True),
        lambda: read_date("2023-02-30"),
        lambda: read_timestamp("noon"),
        lambda: read_timestamp("2024-03-31 01:30", "Europe/Dublin"),  # the clocks skip it
    ):
        with pytest.raises(CellError):
            call()
