"""`lampkeeper runs start|list|reap`: start a site's weekly run, list or reap run records."""

from __future__ import annotations

import argparse

from sqlalchemy import select

from service.api.errors import Invalid, NotFound
from service.db.session import session_factory
from service.register.models import Site
from service.scheduling.models import WeeklyRun
from service.scheduling.runner import reap_expired_runs, run_site_week
from service.scheduling.weeks import parse_week


def _site_id(name_or_id: str) -> int:
    with session_factory()() as s:
        if name_or_id.isdigit() and s.get(Site, int(name_or_id)) is not None:
            return int(name_or_id)
        sid = s.scalar(select(Site.id).where(Site.name == name_or_id))
    if sid is None:
        raise NotFound(f"no site with id or name '{name_or_id}'")
    return int(sid)


def cmd_runs_start(args: argparse.Namespace) -> int:
    """Run a site's weekly issue now."""
    if args.week is not None:
        try:
            parse_week(args.week)
        except ValueError as exc:
            raise Invalid(str(exc)) from exc
    run = run_site_week(session_factory(), _site_id(args.site), week=args.week, trigger="cli")
    print(
        f"run {run.id} site {run.site_id} week {run.iso_week}: {run.outcome}, "
        f"{run.orders_created} orders created ({run.group_orders} group, {run.spot_orders} spot), "
        f"{run.orders_already_there} already there"
    )
    if run.error:
        print(f"error: {run.error}")
    return 0 if run.outcome == "succeeded" else 1


def cmd_runs_list(args: argparse.Namespace) -> int:
    """List recent weekly runs."""
    stmt = select(WeeklyRun).order_by(WeeklyRun.id.desc()).limit(args.limit)
    if args.site is not None:
        stmt = stmt.where(WeeklyRun.site_id == _site_id(args.site))
    with session_factory()() as s:
        for r in s.scalars(stmt):
            print(
                f"{r.id}\tsite {r.site_id}\t{r.iso_week}\t{r.trigger}\t{r.outcome}\t"
                f"{r.orders_created} created\t{r.started_at.isoformat()}"
            )
    return 0


def cmd_runs_reap(args: argparse.Namespace) -> int:
    """Mark failed the running runs whose lease expired (their process died)."""
    reaped = reap_expired_runs(session_factory())
    print(f"{reaped} expired run(s) marked failed")
    return 0


def register(sub: argparse._SubParsersAction[argparse.ArgumentParser]) -> None:
    """Add the `runs` subcommands."""
    runs = sub.add_parser("runs", help="weekly relamping runs").add_subparsers(
        dest="action", required=True
    )
    p = runs.add_parser("start", help="run a site's weekly issue now")
    p.add_argument("--site", required=True, help="site name or id")
    p.add_argument("--week", help="ISO week YYYY-Www (default: the site's current week)")
    p.set_defaults(func=cmd_runs_start)
    p = runs.add_parser("list", help="list weekly runs")
    p.add_argument("--site", help="site name or id")
    p.add_argument("--limit", type=int, default=20)
    p.set_defaults(func=cmd_runs_list)
    p = runs.add_parser("reap", help="mark runs whose lease expired (process died) as failed")
    p.set_defaults(func=cmd_runs_reap)
