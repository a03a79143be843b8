"""`lampkeeper webhooks deliver`: one delivery pass (fan-out, claim, POST) now."""

from __future__ import annotations

import argparse


def cmd_webhooks_deliver(args: argparse.Namespace) -> int:
    """Run delivery passes until nothing is due (or --once)."""
    from service.db.session import session_factory
    from service.webhooks.worker import Deliverer

    worker = Deliverer(session_factory())
    try:
        while True:
            stats = worker.run_pass()
            print(f"{stats.fanned_out} queued, {stats.claimed} claimed, {stats.outcomes}")
            if args.once or stats.claimed == 0:
                break
    finally:
        worker.close()
    return 0


def register(sub: argparse._SubParsersAction[argparse.ArgumentParser]) -> None:
    """Add the `webhooks` command group."""
    hooks = sub.add_parser("webhooks", help="webhook deliveries")
    actions = hooks.add_subparsers(dest="action", required=True)
    deliver = actions.add_parser("deliver", help="deliver what is due")
    deliver.add_argument("--once", action="store_true", help="a single pass")
    deliver.set_defaults(func=cmd_webhooks_deliver)
