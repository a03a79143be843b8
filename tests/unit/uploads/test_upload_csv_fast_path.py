"""The fast CSV reader (pyarrow, for plain files) splits every file as the csv module does.

Property test (hypothesis): for any text, the fast reader either declines (None) or gives
the same columns as Python's csv module, the reference reader of the pipeline.
"""

from __future__ import annotations

import csv
import io

from hypothesis import given, settings
from hypothesis import strategies as st

from service.uploads.parse import RawBody, UploadSpec, _plain_columns, read_upload

CHARS = st.sampled_from(list('ab1 \t.é,"\r\n-'))


def reference(text: str, width: int) -> list[list[str]] | None:
    """Columns of the data rows by the csv module, or None if it refuses or rows are ragged."""
    try:
        rows = list(csv.reader(io.StringIO(text)))[1:]
    except csv.Error:
        return None
    rows = [r or [""] * width for r in rows]  # a line with no cells: blank in every column
    if any(len(r) != width for r in rows):
        return None
    return [list(col) for col in zip(*rows, strict=True)] if rows else None


@settings(max_examples=400, deadline=None)
@given(st.text(CHARS, min_size=0, max_size=80), st.integers(1, 4))
def test_fast_reader_agrees_or_declines(body: str, width: int) -> None:
    text = ",".join(f"h{i}" for i in range(width)) + "\n" + body
    fast = _plain_columns(text, width)
    if fast is not None:
        assert fast == reference(text, width)


@settings(max_examples=200, deadline=None)
@given(
    st.lists(
        st.lists(st.text(st.sampled_from(list("ab1 .é-")), max_size=5), min_size=3, max_size=3),
        min_size=1,
        max_size=30,
    ),
    st.booleans(),
)
def test_plain_tables_take_the_fast_path(rows: list[list[str]], crlf: bool) -> None:
    end = "\r\n" if crlf else "\n"
    text = "a,b,c" + end + "".join(",".join(r) + end for r in rows)
    if all(not "".join(r).strip() for r in rows[-1:]) and len(rows) == 1:
        return  # a lone blank row: nothing to compare
    fast = _plain_columns(text, 3)
    assert fast == reference(text, 3)
    c = read_upload(RawBody(text.encode(), "text/csv"), UploadSpec(columns=("a", "b", "c")))
    kept = [i for i, r in enumerate(rows) if "".join(r).strip()]
    assert c.numbers.tolist() == [i + 2 for i in kept]
    assert c.get("b") == [rows[i][1].strip() or None for i in kept]


@settings(max_examples=100, deadline=None)
@given(
    st.lists(st.sampled_from(["1", "2", "2025-01-01", "8.5", " x "]), min_size=1, max_size=40),
    st.booleans(),
)
def test_repeated_cells_and_a_byte_order_mark_read_as_the_csv_module_reads_them(
    cells: list[str], bom: bool
) -> None:
    """Repeated cells share one object (memory), values and row numbers as csv reads them."""
    text = "a,b\n" + "".join(f"{v},{v}\n" for v in cells)
    data = (b"\xef\xbb\xbf" if bom else b"") + text.encode()
    c = read_upload(RawBody(data, "text/csv"), UploadSpec(columns=("a", "b")))
    ref = reference(text, 2)
    assert ref is not None
    assert c.get("a") == [v.strip() or None for v in ref[0]]
    assert c.numbers.tolist() == list(range(2, len(cells) + 2))
    fast = _plain_columns(text, 2, data)
    assert fast == ref
