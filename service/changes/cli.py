"""`lampkeeper changes prune`: delete changes past the retention."""

from __future__ import annotations

import argparse


def cmd_changes_prune(args: argparse.Namespace) -> int:
    """Delete the changes older than change_retention_days."""
    from service.changes.service import prune
    from service.db.session import begin_write, session_factory

    with session_factory()() as session:
        begin_write(session)
        n = prune(session)
        session.commit()
    print(f"{n} changes pruned")
    return 0


def register(sub: argparse._SubParsersAction[argparse.ArgumentParser]) -> None:
    """Add the `changes` command group."""
    changes = sub.add_parser("changes", help="the change feed")
    actions = changes.add_subparsers(dest="action", required=True)
    prune = actions.add_parser("prune", help="delete changes past the retention")
    prune.set_defaults(func=cmd_changes_prune)
