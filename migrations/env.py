"""Alembic environment: runs migrations against the configured database."""

from __future__ import annotations

from collections.abc import Iterator
from contextlib import contextmanager
from logging.config import fileConfig

from alembic import context
from sqlalchemy import Connection, Engine

import service.models_registry  # noqa: F401  (registers every table on Base.metadata)
from service.config import get_settings
from service.db.base import Base, UTCDateTime
from service.db.session import make_engine

config = context.config
if config.config_file_name is not None and config.attributes.get("configure_logger", True):
    fileConfig(config.config_file_name, disable_existing_loggers=False)

target_metadata = Base.metadata


def _render_item(type_: str, obj: object, autogen_context: object) -> str | bool:
    # Migrations must not import our code: store UTCDateTime as a plain DateTime.
    if type_ == "type" and isinstance(obj, UTCDateTime):
        return "sa.DateTime(timezone=True)"
    return False


def _configure(connection: Connection) -> None:
    context.configure(
        connection=connection,
        target_metadata=target_metadata,
        render_item=_render_item,
        render_as_batch=True,  # SQLite needs table rebuilds for ALTER
        compare_type=True,
    )


def run_offline() -> None:
    url = config.get_main_option("sqlalchemy.url") or get_settings().database_url
    context.configure(url=url, target_metadata=target_metadata, literal_binds=True)
    with context.begin_transaction():
        context.run_migrations()


def _pragma(conn: Connection, sql: str) -> None:
    # Straight to the driver: a SQLAlchemy execute would open a transaction first.
    cur = conn.connection.cursor()
    cur.execute(sql)
    cur.close()


@contextmanager
def _migration_connection(engine: Engine) -> Iterator[Connection]:
    """A connection for the migrations; on SQLite with foreign keys off for the run.

    Batch mode ALTERs a SQLite table by copy, drop and rename; with foreign keys on, dropping
    a parent table that has rows fails (lamp_types under fixtures, in 0007). The pragma only
    takes effect outside a transaction, so it is set before the migrations' transaction and
    the keys are checked inside it (_check_foreign_keys) before the commit.
    """
    with engine.connect() as conn:
        sqlite = conn.dialect.name == "sqlite"
        if sqlite:
            _pragma(conn, "PRAGMA foreign_keys=OFF")
        try:
            yield conn
        finally:
            if sqlite:
                conn.rollback()
                _pragma(conn, "PRAGMA foreign_keys=ON")  # the pool's connections keep them on


def _check_foreign_keys(conn: Connection) -> None:
    """Fail the migration (rolled back) if it left a row pointing at nothing (SQLite)."""
    if conn.dialect.name != "sqlite":
        return
    bad = conn.exec_driver_sql("PRAGMA foreign_key_check").all()
    if bad:
        raise RuntimeError(f"migration left rows with broken foreign keys: {bad[:5]}")


def run_online() -> None:
    connection = config.attributes.get("connection")
    if connection is not None:
        # Tests and the CLI may hand us an open connection.
        _configure(connection)
        with context.begin_transaction():
            context.run_migrations()
        return
    url = config.get_main_option("sqlalchemy.url") or get_settings().database_url
    engine = make_engine(url)
    with _migration_connection(engine) as conn:
        _configure(conn)
        with context.begin_transaction():
            context.run_migrations()
            _check_foreign_keys(conn)
    engine.dispose()


if context.is_offline_mode():
    run_offline()
else:
    run_online()
