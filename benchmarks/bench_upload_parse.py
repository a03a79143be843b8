"""Upload parsing speed: the CSV readers the upload pipeline could use, on the same bytes.

Run: .venv/bin/python benchmarks/bench_upload_parse.py [--rows 1000000]
Times (median of 3) the 1,000,000-row burn-hour CSV of bench_burn_upload.py and the
100,000-fixture CSV of bench_import.py into columns of stripped text cells with row numbers:
the pipeline as it runs (service.uploads.parse.read_upload: pyarrow's reader for plain
files), the same with the csv module only (the path quoted files take), and polars'
reader when it is installed (it is not a dependency), for the record of why pyarrow.
"""

from __future__ import annotations

import io
import statistics
import sys
import time
from collections.abc import Callable
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))
sys.path.insert(0, str(ROOT / "benchmarks"))

import bench_burn_upload  # noqa: E402
import bench_import  # noqa: E402
from _table import Table, parser  # noqa: E402

from service.readings.burn_hours import BURN_UPLOAD  # noqa: E402
from service.register.fixture_bulk import FIXTURE_UPLOAD  # noqa: E402
from service.uploads import parse  # noqa: E402
from service.uploads.parse import RawBody, UploadSpec, read_upload  # noqa: E402


def median_s(f: Callable[[], object], n: int = 3) -> float:
    """Median wall time of n calls."""
    times = []
    for _ in range(n):
        t0 = time.perf_counter()
        f()
        times.append(time.perf_counter() - t0)
    return statistics.median(times)


def csv_module_only(data: bytes, spec: UploadSpec) -> object:
    """read_upload with the fast reader switched off."""
    keep = parse._plain_columns
    parse._plain_columns = lambda text, width, data=None: None  # type: ignore[assignment]
    try:
        return read_upload(RawBody(data, "text/csv"), spec)
    finally:
        parse._plain_columns = keep  # type: ignore[assignment]


def polars_columns(data: bytes) -> object:
    """polars' reader into the same stripped text columns."""
    import polars as pl

    df = pl.read_csv(io.BytesIO(data), infer_schema=False)
    return {
        n: [v.strip() or None if v is not None else None for v in df[n].to_list()]
        for n in df.columns
    }


def main() -> int:
    """Print and write one row per reader and file."""
    ap = parser(__doc__, default_repeats=3)
    ap.add_argument("--rows", type=int, default=1_000_000)
    args = ap.parse_args()
    rows = 2_000 if args.quick else args.rows
    repeats = 1 if args.quick else args.repeats
    table = Table("bench_upload_parse", args.quick)
    burn = bench_burn_upload.csv_body(list(range(1, 10_001)), max(rows, 10_000))
    fixtures, _ = bench_import.make_csv(500 if args.quick else 100_000)
    try:
        import polars  # noqa: F401

        have_polars = True
    except ImportError:
        have_polars = False
    for label, data, spec in (
        (f"burn hours, {max(rows, 10_000):,} rows", burn, BURN_UPLOAD),
        (f"fixtures, {500 if args.quick else 100_000:,} rows", fixtures, FIXTURE_UPLOAD),
    ):
        table.timed(
            "-",
            f"upload parse (pyarrow reader), {label}",
            lambda d=data, s=spec: read_upload(RawBody(d, "text/csv"), s),
            anchor="csv module only (quoted files' path)",
            anchor_fn=lambda d=data, s=spec: csv_module_only(d, s),
            repeats=repeats,
            warmup=0,
        )
        if have_polars:
            table.timed(
                "-",
                f"polars reader to the same text columns, {label}",
                lambda d=data: polars_columns(d),
                anchor="pipeline (pyarrow reader)",
                anchor_fn=lambda d=data, s=spec: read_upload(RawBody(d, "text/csv"), s),
                repeats=repeats,
                warmup=0,
            )
    table.finish(args.json)
    return 0


if __name__ == "__main__":
    sys.exit(main())
