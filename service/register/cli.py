"""`lampkeeper import ...` and `lampkeeper export ...`: lamp types and fixtures, CSV or JSON.

An import is one transaction: every row goes in, or none and the row errors are printed.
"""

from __future__ import annotations

import argparse
import sys
from typing import Any

from sqlalchemy import select

from service.api.bulk import to_csv, to_json
from service.api.errors import DomainError


def _print_errors(exc: DomainError) -> int:
    print(f"error: {exc.detail}", file=sys.stderr)
    for e in exc.errors or []:
        where = f"row {e['row']}" if "row" in e else e.get("in", "")
        field = f" {e['field']}" if e.get("field") else ""
        print(f"  {where}{field}: {e['message']}", file=sys.stderr)
    return 2


def cmd_import(args: argparse.Namespace) -> int:
    """Import lamp types or fixtures from a CSV or JSON (.json) file."""
    from service.catalogue.bulk import LAMP_TYPE_UPLOAD, import_lamp_types
    from service.db.session import transaction
    from service.register.fixture_bulk import FIXTURE_UPLOAD, import_fixtures
    from service.uploads.parse import read_path

    try:
        with transaction() as session:
            if args.what == "lamp-types":
                rows = read_path(args.file, LAMP_TYPE_UPLOAD)
                lt = import_lamp_types(session, rows, args.on_duplicate)
                line = f"{lt.rows} rows: {lt.created} lamp types created, {lt.updated} updated"
            else:
                rows = read_path(args.file, FIXTURE_UPLOAD)
                fx = import_fixtures(session, rows, args.on_duplicate)
                line = (
                    f"{fx.rows} rows: {fx.created} fixtures created, {fx.updated} updated, "
                    f"{fx.positions_created} lamp positions added"
                )
    except DomainError as exc:
        return _print_errors(exc)
    except OSError as exc:
        print(f"error: cannot read {args.file}: {exc.strerror}", file=sys.stderr)
        return 2
    print(line)
    return 0


def cmd_export(args: argparse.Namespace) -> int:
    """Write lamp types or fixtures to standard output as CSV or JSON."""
    from service.catalogue.bulk import export_lamp_types
    from service.catalogue.schemas import LAMP_TYPE_FIELDS
    from service.db.session import transaction
    from service.register.fixture_bulk import FIXTURE_COLUMNS
    from service.register.fixture_export import export_fixtures
    from service.register.models import Site

    rows: list[dict[str, Any]]
    with transaction() as session:
        if args.what == "lamp-types":
            columns = LAMP_TYPE_FIELDS
            rows = export_lamp_types(session, technology=args.technology)
        else:
            columns = FIXTURE_COLUMNS
            site_id = None
            if args.site:
                site_id = session.scalar(select(Site.id).where(Site.name == args.site))
                if site_id is None:
                    print(f"error: no site named '{args.site}'", file=sys.stderr)
                    return 2
            rows = export_fixtures(session, site_id=site_id)
    text = to_json(columns, rows) + "\n" if args.format == "json" else to_csv(columns, rows)
    try:
        sys.stdout.write(text)
        sys.stdout.flush()
    except BrokenPipeError:  # e.g. piped into `head`
        pass
    return 0


def register(sub: argparse._SubParsersAction[argparse.ArgumentParser]) -> None:
    """Add the `import` and `export` commands to the console script."""
    p = sub.add_parser("import", help="import lamp types or fixtures from CSV or JSON")
    p.add_argument("what", choices=["lamp-types", "fixtures"])
    p.add_argument("file", help="a .csv file (header first) or a .json list of objects")
    p.add_argument(
        "--on-duplicate",
        choices=["error", "update"],
        default="error",
        help="an existing code or tag: error (default) or update it",
    )
    p.set_defaults(func=cmd_import)

    p = sub.add_parser("export", help="write lamp types or fixtures as CSV or JSON to stdout")
    p.add_argument("what", choices=["lamp-types", "fixtures"])
    p.add_argument("--format", choices=["csv", "json"], default="csv")
    p.add_argument("--site", help="fixtures of this site only (its name)")
    p.add_argument("--technology", help="lamp types of this technology only")
    p.set_defaults(func=cmd_export)
