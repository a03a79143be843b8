"""The one benchmark table: each figure beside its anchor from the same run, their ratio.

Every bench script builds a `Table`, adds rows with `Table.timed` (median of repeats of a
figure and of its anchor, interleaved so machine noise hits both alike) or `Table.add`
(medians measured elsewhere, e.g. through a server), prints it and writes it as JSON.
`benchmarks/run_all.py` (`make bench`) runs every script in its own process and merges
their JSON into var/bench/latest.json, printing one table.

Common options of every script: --quick (a smoke run: small sizes, 1 repeat; figures are
not comparable), --repeats N, --json PATH (default var/bench/<script>.json).
"""

from __future__ import annotations

import argparse
import json
import platform
import statistics
import sys
import time
from collections.abc import Callable
from dataclasses import asdict, dataclass, field
from datetime import UTC, datetime
from pathlib import Path
from typing import Any

ROOT = Path(__file__).resolve().parents[1]
BENCH_DIR = ROOT / "var" / "bench"
LATEST = BENCH_DIR / "latest.json"


@dataclass
class Row:
    """One figure and its anchor: medians in seconds, ratio = figure / anchor."""

    id: str
    figure: str
    figure_s: float
    anchor: str | None = None
    anchor_s: float | None = None
    repeats: int = 1
    target: str = ""
    note: str = ""

    @property
    def ratio(self) -> float | None:
        """Figure over anchor (lower is better), when there is an anchor."""
        if self.anchor_s is None or self.anchor_s <= 0:
            return None
        return self.figure_s / self.anchor_s


def median_s(fn: Callable[[], object], repeats: int, warmup: int = 0) -> tuple[float, list[float]]:
    """Median wall time of fn in seconds over repeats calls, and every time."""
    for _ in range(warmup):
        fn()
    times = []
    for _ in range(max(1, repeats)):
        t0 = time.perf_counter()
        fn()
        times.append(time.perf_counter() - t0)
    return statistics.median(times), times


def paired_medians(
    fig: Callable[[], object], anchor: Callable[[], object], repeats: int, warmup: int = 1
) -> tuple[float, float]:
    """Medians of fig and anchor, calls interleaved so both see the same machine load."""
    for _ in range(warmup):
        fig()
        anchor()
    a: list[float] = []
    b: list[float] = []
    for _ in range(max(1, repeats)):
        t0 = time.perf_counter()
        fig()
        t1 = time.perf_counter()
        anchor()
        t2 = time.perf_counter()
        a.append(t1 - t0)
        b.append(t2 - t1)
    return statistics.median(a), statistics.median(b)


def parser(doc: str | None, default_repeats: int = 5) -> argparse.ArgumentParser:
    """An argument parser with the options every bench script takes."""
    ap = argparse.ArgumentParser(description=(doc or "").strip().splitlines()[0])
    ap.add_argument("--quick", action="store_true", help="smoke run: small sizes, 1 repeat")
    ap.add_argument("--repeats", type=int, default=default_repeats)
    ap.add_argument("--json", type=Path, default=None, help="where to write the rows")
    return ap


@dataclass
class Table:
    """The rows of one bench script."""

    script: str
    quick: bool = False
    rows: list[Row] = field(default_factory=list)

    def add(self, row: Row) -> Row:
        """Append a row and print it at once (long scripts show progress)."""
        self.rows.append(row)
        print(format_rows([row], header=False), flush=True)
        return row

    def timed(
        self,
        id: str,
        figure: str,
        fn: Callable[[], object],
        *,
        anchor: str | None = None,
        anchor_fn: Callable[[], object] | None = None,
        repeats: int = 5,
        warmup: int = 1,
        target: str = "",
        note: str = "",
    ) -> Row:
        """Time fn (and anchor_fn, interleaved) as medians of repeats; add the row."""
        if anchor_fn is None:
            fig, _ = median_s(fn, repeats, warmup)
            return self.add(Row(id, figure, fig, None, None, repeats, target, note))
        fig, anc = paired_medians(fn, anchor_fn, repeats, warmup)
        return self.add(Row(id, figure, fig, anchor, anc, repeats, target, note))

    def finish(self, path: Path | None = None) -> Path:
        """Print the whole table and write it as JSON; returns the path."""
        print()
        print(format_rows(self.rows))
        out = path or BENCH_DIR / f"{self.script}.json"
        out.parent.mkdir(parents=True, exist_ok=True)
        out.write_text(json.dumps(document({self.script: self}), indent=2) + "\n")
        return out


def _fmt_s(s: float | None) -> str:
    if s is None:
        return "-"
    if s < 1e-3:
        return f"{s * 1e6:.0f} us"
    if s < 1.0:
        return f"{s * 1e3:.2f} ms"
    return f"{s:.2f} s"


def format_rows(rows: list[Row], header: bool = True) -> str:
    """Rows as a fixed-width text table."""
    lines = []
    if header:
        lines.append(
            f"{'id':<5} {'figure':<52} {'median':>10} {'anchor':<40} {'median':>10} "
            f"{'ratio':>6} {'n':>3}  target"
        )
    for r in rows:
        ratio = f"{r.ratio:.2f}" if r.ratio is not None else "-"
        lines.append(
            f"{r.id:<5} {r.figure[:52]:<52} {_fmt_s(r.figure_s):>10} {(r.anchor or '-')[:40]:<40} "
            f"{_fmt_s(r.anchor_s):>10} {ratio:>6} {r.repeats:>3}  {r.target}"
            + (f"  ({r.note})" if r.note else "")
        )
    return "\n".join(lines)


def document(tables: dict[str, Table]) -> dict[str, Any]:
    """The JSON form: when, where, and every row with its ratio."""
    return {
        "written_at": datetime.now(UTC).isoformat(timespec="seconds"),
        "python": platform.python_version(),
        "machine": platform.machine(),
        "quick": any(t.quick for t in tables.values()),
        "scripts": {
            name: [asdict(r) | {"ratio": r.ratio} for r in t.rows] for name, t in tables.items()
        },
    }


def load_rows(path: Path) -> dict[str, list[Row]]:
    """Rows per script from a JSON file written by Table.finish."""
    data = json.loads(path.read_text())
    out: dict[str, list[Row]] = {}
    for name, rows in data["scripts"].items():
        out[name] = [Row(**{k: v for k, v in r.items() if k != "ratio"}) for r in rows]
    return out


def flush() -> None:
    """Flush stdout (the scripts run as subprocesses of run_all)."""
    sys.stdout.flush()
