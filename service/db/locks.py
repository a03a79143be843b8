"""Per-site write locks shared by the weekly run and hand-made orders."""

from __future__ import annotations

from sqlalchemy import text
from sqlalchemy.orm import Session

LOCK_NAMESPACE = 0x4C4B  # first key of the two-key advisory lock: "LK"


def lock_site(session: Session, site_id: int) -> None:
    """Hold the site's write lock until the session's transaction ends.

    PostgreSQL: a transaction-level advisory lock (pg_advisory_xact_lock), so replicas
    queue. SQLite: a writer transaction (BEGIN IMMEDIATE) already excludes every other
    writer on the database, so nothing more is needed there.
    """
    if session.get_bind().dialect.name == "postgresql":
        session.execute(
            text("SELECT pg_advisory_xact_lock(:ns, :site)"),
            {"ns": LOCK_NAMESPACE, "site": site_id},
        )
