"""`lampkeeper demo ...`: load the invented demo scenario, print its key."""

from __future__ import annotations

import argparse
from pathlib import Path


def cmd_demo_load(args: argparse.Namespace) -> int:
    """Load the demo scenario (all of it, in one transaction)."""
    from service.db.session import transaction
    from service.seed.loader import load_demo

    with transaction() as session:
        summary = load_demo(session, if_empty=args.if_empty, key_file=args.key_file)
    if not summary.loaded:
        print(f"demo not loaded: {summary.reason}")
        return 0
    counts = ", ".join(f"{n} {table.replace('_', ' ')}" for table, n in summary.counts.items())
    print(f"loaded the demo for {summary.organisation}: {counts}")
    print(f"demo admin key written to {summary.key_file}")
    return 0


def cmd_demo_key(args: argparse.Namespace) -> int:
    """Print the demo admin key (a fresh one if the saved one is gone or revoked)."""
    from service.db.session import transaction
    from service.seed.loader import demo_key

    with transaction() as session:
        key = demo_key(session, args.key_file)
    if key is None:
        print("the demo is not loaded; run: lampkeeper demo load")
        return 1
    print(key)
    return 0


def register(sub: argparse._SubParsersAction[argparse.ArgumentParser]) -> None:
    """Add the `demo` command group to the console script."""
    demo = sub.add_parser("demo", help="the invented demo scenario").add_subparsers(
        dest="action", required=True
    )
    p = demo.add_parser("load", help="load the demo sites, lamp types, fixtures and history")
    p.add_argument(
        "--if-empty", action="store_true", help="load only when the database has no sites"
    )
    p.add_argument("--key-file", type=Path, default=None, help="where to write the demo key")
    p.set_defaults(func=cmd_demo_load)
    p = demo.add_parser("key", help="print the demo admin key")
    p.add_argument("--key-file", type=Path, default=None, help="where the demo key is kept")
    p.set_defaults(func=cmd_demo_key)
