"""Fixtures of the feed tests: a committed database per module and a client on it."""

from __future__ import annotations

from collections.abc import Iterator

import pytest
from fastapi import FastAPI
from fastapi.testclient import TestClient
from sqlalchemy import Engine
from sqlalchemy.orm import Session, sessionmaker

from service.db.session import make_engine
from tests.changes.live import admin_headers, drop_scratch, live_client, scratch_url


@pytest.fixture(scope="module")
def live_url(
    db_url: str, tmp_path_factory: pytest.TempPathFactory, request: pytest.FixtureRequest
) -> Iterator[str]:
    """A migrated database of this module's own whose commits are real."""
    tag = request.module.__name__.rsplit(".", 1)[-1][:30]
    url = scratch_url(db_url, tmp_path_factory.mktemp("live"), tag)
    yield url
    drop_scratch(url)


@pytest.fixture(scope="module")
def live_engine(live_url: str) -> Iterator[Engine]:
    """An engine on the module's database."""
    eng = make_engine(live_url)
    yield eng
    eng.dispose()


@pytest.fixture()
def live_factory(live_engine: Engine) -> sessionmaker[Session]:
    """Sessions on the module's database."""
    return sessionmaker(bind=live_engine, expire_on_commit=False, autoflush=False)


@pytest.fixture()
def live(app: FastAPI, live_engine: Engine) -> Iterator[TestClient]:
    """An API client committing on the module's database."""
    yield from live_client(app, live_engine)


@pytest.fixture()
def live_admin(live_factory: sessionmaker[Session]) -> dict[str, str]:
    """An admin key on the module's database."""
    return admin_headers(live_factory)
