"""Run every bench script in its own process and print one table (`make bench`).

Run: python benchmarks/run_all.py [--quick] [--only NAME,...] [--skip NAME,...] [--repeats N]
Each script writes var/bench/<script>.json; the merged table goes to var/bench/latest.json
(the file the README names), so a later change can be compared with it. A script that
fails is listed with its exit status and the others still run.
"""

from __future__ import annotations

import argparse
import json
import subprocess
import sys
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent))

from _table import BENCH_DIR, LATEST, Table, document, format_rows, load_rows

HERE = Path(__file__).resolve().parent


def scripts() -> list[Path]:
    """Every bench_*.py beside this file, in name order."""
    return sorted(HERE.glob("bench_*.py"))


def main() -> int:
    """Run the scripts, merge their rows, print and write the table."""
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--quick", action="store_true", help="smoke run of every script")
    ap.add_argument("--only", default="", help="comma-separated script names (bench_x)")
    ap.add_argument("--skip", default="", help="comma-separated script names to leave out")
    ap.add_argument("--out", type=Path, default=LATEST)
    ap.add_argument("--repeats", type=int, default=None, help="passed to every script")
    args = ap.parse_args()
    only = {s for s in args.only.split(",") if s}
    skip = {s for s in args.skip.split(",") if s}
    tables: dict[str, Table] = {}
    failed: dict[str, int] = {}
    for path in scripts():
        name = path.stem
        if (only and name not in only) or name in skip:
            continue
        out = BENCH_DIR / f"{name}.json"
        out.unlink(missing_ok=True)
        cmd = [sys.executable, str(path), "--json", str(out)] + (["--quick"] if args.quick else [])
        cmd += ["--repeats", str(args.repeats)] if args.repeats else []
        print(f"=== {name}", flush=True)
        rc = subprocess.call(cmd, cwd=HERE.parent)
        if rc != 0 or not out.exists():
            failed[name] = rc
            continue
        for script, rows in load_rows(out).items():
            tables[script] = Table(script, args.quick, rows)
    print()
    print(format_rows([r for t in tables.values() for r in t.rows]))
    doc = document(tables)
    doc["failed"] = failed
    args.out.parent.mkdir(parents=True, exist_ok=True)
    args.out.write_text(json.dumps(doc, indent=2) + "\n")
    print(f"\nwritten to {args.out}" + (f"; failed: {failed}" if failed else ""))
    return 1 if failed else 0


if __name__ == "__main__":
    sys.exit(main())
