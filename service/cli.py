"""The `lampkeeper` console script: serve, migrate, keys, demo data, import/export, runs."""

from __future__ import annotations

import argparse
import os
import sys
from collections.abc import Callable, Sequence

from service.changes import cli as changes_cli
from service.config import get_settings
from service.db.session import transaction
from service.register import cli as register_cli
from service.scheduling import cli as runs_cli
from service.seed import cli as seed_cli
from service.users import cli as users_cli
from service.webhooks import cli as webhooks_cli

Handler = Callable[[argparse.Namespace], int]


def cmd_migrate(args: argparse.Namespace) -> int:
    """Bring the database schema to the newest migration."""
    from alembic import command

    from service.api.health import alembic_config

    cfg = alembic_config()
    cfg.set_main_option("sqlalchemy.url", get_settings().database_url)
    command.upgrade(cfg, args.revision)
    print(f"database at migration {args.revision}")
    return 0


def cmd_serve(args: argparse.Namespace) -> int:
    """Serve the API with uvicorn."""
    import uvicorn

    settings = get_settings()
    host = args.host or settings.host
    port = args.port or settings.port
    if args.print_demo_key:
        from service.seed.loader import demo_key
        from service.seed.users import DEMO_PASSWORD, ensure_demo_users

        with transaction() as session:
            key = demo_key(session)
            demo_people = ensure_demo_users(session) if key else []
        print(f"\nLampKeeper is serving at http://{host}:{port}  (API docs: /docs)")
        print(f"Sign in to the web pages: http://{host}:{port}/sign-in")
        for name, role in demo_people:
            print(f"  demo login ({role}): {name} / {DEMO_PASSWORD}")
        if key:
            print(f"Demo API key (admin scope): {key}")
            print(
                f"  try: curl -H 'Authorization: Bearer {key}' http://{host}:{port}/api/v1/fixtures\n"
            )
    workers = worker_count(args.workers, settings.workers, settings.database_url)
    if workers > 1 and settings.database_url.startswith("sqlite"):
        print("--workers above 1 needs PostgreSQL: SQLite serves from one process.")
        return 2
    scheduler = None
    if workers > 1:
        # The scheduler runs here, in the supervisor, once; the workers (spawned, so they
        # read the environment afresh) serve requests only. The weekly-run lock still
        # keeps other replicas from running a site's week twice.
        os.environ["LAMPKEEPER_SCHEDULER_ENABLED"] = "false"
        if settings.scheduler_enabled:
            from service.scheduling.scheduler import start_scheduler

            scheduler = start_scheduler()
    try:
        uvicorn.run(
            "service.main:create_app",
            factory=True,
            host=host,
            port=port,
            workers=workers,
            log_level=settings.log_level.lower(),
            access_log=False,  # service.api.observe writes one JSON line per request instead
        )
    finally:
        if scheduler is not None:
            scheduler.shutdown()
    return 0


def worker_count(asked: int | None, configured: int | None, database_url: str) -> int:
    """Worker processes: --workers, else LAMPKEEPER_WORKERS, else cores (PostgreSQL) or 1."""
    if asked is not None:
        return asked
    if configured is not None:
        return configured
    if database_url.startswith("sqlite"):
        return 1
    return max(1, os.cpu_count() or 1)


def cmd_keys_create(args: argparse.Namespace) -> int:
    """Create an API key and print its secret once."""
    from service.keys import service

    with transaction() as session:
        row, secret = service.create_key(session, args.name, args.scope)
        print(f"created key {row.id} '{row.name}' with scope {row.scope}")
    print(secret)
    return 0


def cmd_keys_list(args: argparse.Namespace) -> int:
    """List API keys (never their secrets)."""
    from service.keys import service

    with transaction() as session:
        for k in service.list_keys(session):
            state = "revoked" if k.revoked_at else "active"
            print(f"{k.id}\t{k.name}\t{k.scope}\t{k.prefix}...\t{state}")
    return 0


def cmd_keys_revoke(args: argparse.Namespace) -> int:
    """Revoke an API key by id."""
    from service.keys import service

    with transaction() as session:
        service.revoke_key(session, args.id)
    print(f"revoked key {args.id}")
    return 0


def build_parser() -> argparse.ArgumentParser:
    """The argument parser with every subcommand."""
    parser = argparse.ArgumentParser(prog="lampkeeper", description=__doc__)
    sub = parser.add_subparsers(dest="command", required=True)

    p = sub.add_parser("migrate", help="apply database migrations")
    p.add_argument("revision", nargs="?", default="head")
    p.set_defaults(func=cmd_migrate)

    p = sub.add_parser("serve", help="serve the HTTP API")
    p.add_argument("--host")
    p.add_argument("--port", type=int)
    p.add_argument("--print-demo-key", action="store_true", help="print the demo admin key")
    p.add_argument(
        "--workers",
        type=int,
        choices=range(1, 65),
        metavar="N",
        help="worker processes (default: cores on PostgreSQL, 1 on SQLite)",
    )
    p.set_defaults(func=cmd_serve)

    keys = sub.add_parser("keys", help="manage API keys").add_subparsers(
        dest="action", required=True
    )
    p = keys.add_parser("create", help="create a key")
    p.add_argument("--name", required=True)
    p.add_argument("--scope", required=True, choices=["read", "write", "admin"])
    p.set_defaults(func=cmd_keys_create)
    p = keys.add_parser("list", help="list keys")
    p.set_defaults(func=cmd_keys_list)
    p = keys.add_parser("revoke", help="revoke a key")
    p.add_argument("id", type=int)
    p.set_defaults(func=cmd_keys_revoke)

    for register in EXTRA_COMMANDS:
        register(sub)
    return parser


# Domains add their own subcommands here: each entry receives the subparsers object.
EXTRA_COMMANDS: list[Callable[[argparse._SubParsersAction[argparse.ArgumentParser]], None]] = []
EXTRA_COMMANDS.append(seed_cli.register)
EXTRA_COMMANDS.append(runs_cli.register)
EXTRA_COMMANDS.append(register_cli.register)
EXTRA_COMMANDS.append(users_cli.register)
EXTRA_COMMANDS.append(changes_cli.register)
EXTRA_COMMANDS.append(webhooks_cli.register)


def main(argv: Sequence[str] | None = None) -> int:
    """Entry point of the console script."""
    args = build_parser().parse_args(argv)
    handler: Handler = args.func
    try:
        return handler(args)
    except Exception as exc:  # a CLI prints the problem instead of a traceback
        from service.api.errors import DomainError

        if isinstance(exc, DomainError):
            print(f"error: {exc.detail}", file=sys.stderr)
            return 2
        raise


if __name__ == "__main__":
    sys.exit(main())
