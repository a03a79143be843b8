"""`lampkeeper users create|list|disable|set-password`."""

from __future__ import annotations

import argparse
import getpass
import os
import sys

from service.api.errors import DomainError
from service.users.models import Role


def _password(args: argparse.Namespace) -> str:
    # From the environment for scripts, else asked twice without echo.
    env = os.environ.get("LAMPKEEPER_NEW_PASSWORD")
    if env:
        return env
    first = getpass.getpass("password: ")
    if first != getpass.getpass("again: "):
        raise DomainError("The two passwords differ.")
    return first


def cmd_users(args: argparse.Namespace) -> int:
    """Run one users sub-command in one transaction."""
    from service.db.session import transaction
    from service.users import service

    try:
        with transaction() as session:
            if args.users_cmd == "create":
                u = service.create_user(
                    session, args.username, args.name or args.username, args.role, _password(args)
                )
                print(f"user {u.username} created with role {u.role}")
            elif args.users_cmd == "list":
                for u in service.list_users(session):
                    state = "disabled" if u.disabled_at else "active"
                    print(f"{u.username}\t{u.role}\t{state}\t{u.display_name}")
            elif args.users_cmd == "disable":
                print(f"user {service.disable_user(session, args.username).username} disabled")
            else:
                service.set_password(session, args.username, _password(args))
                print(f"password of {args.username} changed; its sessions ended")
    except DomainError as exc:
        print(f"error: {exc.detail}", file=sys.stderr)
        return 2
    return 0


def register(sub: argparse._SubParsersAction[argparse.ArgumentParser]) -> None:
    """Add the users commands to the console script."""
    users = sub.add_parser("users", help="manage people who sign in to the web pages")
    cmds = users.add_subparsers(dest="users_cmd", required=True)
    p = cmds.add_parser(
        "create", help="create a user (password from LAMPKEEPER_NEW_PASSWORD or asked)"
    )
    p.add_argument("username")
    p.add_argument("--role", required=True, choices=list(Role))
    p.add_argument("--name", help="the name shown on pages")
    cmds.add_parser("list", help="list users")
    p = cmds.add_parser("disable", help="disable a user and end their sessions")
    p.add_argument("username")
    p = cmds.add_parser("set-password", help="set a user's password and end their sessions")
    p.add_argument("username")
    users.set_defaults(func=cmd_users)
