"""The browser tests' server runs on the suite's kind of database (SQLite or PostgreSQL)."""

from __future__ import annotations

import os

from sqlalchemy import func, select
from sqlalchemy.engine import make_url

from service.db.session import make_engine
from service.register.models import Site
from tests.browser.conftest import Server


def test_server_database_follows_the_suite(server: Server) -> None:
    suite = os.environ.get("TEST_DATABASE_URL") or "sqlite://"
    assert make_url(server.db_url).get_backend_name() == make_url(suite).get_backend_name()
    if suite.startswith("postgresql"):  # a scratch database of its own, never the suite's
        assert make_url(server.db_url).database != make_url(suite).database
    engine = make_engine(server.db_url)
    with engine.connect() as conn:
        assert (conn.scalar(select(func.count()).select_from(Site)) or 0) > 0  # the demo
    engine.dispose()
