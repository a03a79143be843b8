"""A real server and a headless system Chromium for the browser tests.

The server is `uvicorn` in a subprocess on a free port, on a temporary database built by
`lampkeeper migrate` and `lampkeeper demo load` (the demo people are added as `make run`
does): a SQLite file, or a scratch PostgreSQL database beside TEST_DATABASE_URL's when the
suite runs on PostgreSQL (dropped afterwards). Chromium and chromedriver come from the operating system (.ci/run installs them);
without them the tests are skipped, and nothing downloads a browser build.
"""

from __future__ import annotations

import os
import shutil
import socket
import subprocess
import sys
import tempfile
import time
import urllib.request
from collections.abc import Iterator
from contextlib import ExitStack
from dataclasses import dataclass
from pathlib import Path

import pytest
from sqlalchemy.orm import Session

from tests.conftest import scratch_postgres

CHROMIUM = os.environ.get("LAMPKEEPER_CHROMIUM", "/usr/bin/chromium")
CHROMEDRIVER = os.environ.get("LAMPKEEPER_CHROMEDRIVER", "/usr/bin/chromedriver")
# Where each test saves its screenshot; the README's pictures are made with
# LAMPKEEPER_SCREENSHOTS=docs/screenshots (see README, "Web app").
SCREENSHOTS = Path(os.environ.get("LAMPKEEPER_SCREENSHOTS", Path(__file__).parent / "screenshots"))
BIN = Path(sys.executable).parent
STARTUP_S = 60.0  # how long the server may take to answer /healthz (a loaded CI machine)


@dataclass(frozen=True)
class Server:
    """The running app: its base URL and the database URL behind it."""

    base: str
    db_url: str
    order_id: int  # a draft group order made for the tests
    second_order_id: int  # another area's draft group order, for the completion test


def _free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return int(s.getsockname()[1])


def _run(args: list[str], env: dict[str, str]) -> None:
    subprocess.run(args, env=env, check=True, capture_output=True, timeout=300)


def _prepare_demo(db_url: str) -> tuple[int, int]:
    """Add the demo people (as `make run` does) and two areas' draft group orders."""
    from sqlalchemy import func, select

    from service.db.session import make_engine
    from service.register.models import Area, Fixture
    from service.seed.users import ensure_demo_users
    from service.workorders import service as orders
    from service.workorders.schemas import WorkOrderCreate

    engine = make_engine(db_url)
    with Session(engine) as session, session.begin():
        ensure_demo_users(session)
        first = session.scalars(select(Area.id).order_by(Area.id)).first()
        # The completion test wants multi-lamp fixtures (one lamp skipped, another found
        # dark): the area of two-lamp fixtures with the fewest fixtures.
        second = session.scalars(
            select(Fixture.area_id)
            .where(Fixture.lamps_per_fixture >= 2, Fixture.area_id != first)
            .group_by(Fixture.area_id)
            .order_by(func.count(), Fixture.area_id)
        ).first()
        assert first is not None and second is not None
        ids = tuple(
            orders.create(session, WorkOrderCreate(area_id=a, kind="group_relamp")).id
            for a in (first, second)
        )
    engine.dispose()
    return ids[0], ids[1]


def _wait_healthy(base: str, proc: subprocess.Popen[bytes]) -> None:
    deadline = time.monotonic() + STARTUP_S
    while time.monotonic() < deadline:
        if proc.poll() is not None:
            raise RuntimeError(f"the server exited with {proc.returncode}")
        try:
            with urllib.request.urlopen(f"{base}/healthz", timeout=2) as r:
                if r.status == 200:
                    return
        except OSError:
            time.sleep(0.2)  # polling for start-up only; no test asserts on time
    raise RuntimeError("the server did not answer /healthz")


def _database(stack: ExitStack, tmp: Path) -> str:
    """The server's database: a scratch PostgreSQL one on a PostgreSQL run, else SQLite."""
    base = os.environ.get("TEST_DATABASE_URL") or ""
    if base.startswith("postgresql"):
        return stack.enter_context(scratch_postgres(base, "browser"))
    return f"sqlite:///{tmp / 'browser.sqlite3'}"


def _serve(port: int, env: dict[str, str]) -> subprocess.Popen[bytes]:
    args = ["service.main:create_app", "--factory", "--host", "127.0.0.1", "--port", str(port)]
    return subprocess.Popen(
        [str(BIN / "python"), "-m", "uvicorn", *args, "--log-level", "warning"], env=env
    )


@pytest.fixture(scope="session")
def server() -> Iterator[Server]:
    """uvicorn on a free port against a fresh demo database (scheduler off)."""
    if not (os.access(CHROMIUM, os.X_OK) and os.access(CHROMEDRIVER, os.X_OK)):
        pytest.fail(
            f"needs {CHROMIUM} and {CHROMEDRIVER} (apt-get install chromium chromium-driver;"
            " bash .ci/run does it)"
        )
    tmp = Path(tempfile.mkdtemp(prefix="lk-browser-"))
    with ExitStack() as stack:
        stack.callback(shutil.rmtree, tmp, ignore_errors=True)
        db_url = _database(stack, tmp)
        env = {
            **os.environ,
            "LAMPKEEPER_DATABASE_URL": db_url,
            "LAMPKEEPER_SCHEDULER_ENABLED": "false",
            "LAMPKEEPER_LOG_LEVEL": "warning",
        }
        _run([str(BIN / "lampkeeper"), "migrate"], env)
        _run([str(BIN / "lampkeeper"), "demo", "load", "--key-file", str(tmp / "key.txt")], env)
        order_id, second_order_id = _prepare_demo(db_url)
        port = _free_port()
        base = f"http://127.0.0.1:{port}"
        proc = _serve(port, env)
        try:
            _wait_healthy(base, proc)
            yield Server(base, db_url, order_id, second_order_id)
        finally:
            proc.terminate()
            try:
                proc.wait(timeout=20)
            except subprocess.TimeoutExpired:
                proc.kill()


@pytest.fixture(scope="session")
def browser(server: Server) -> Iterator[object]:
    """One headless Chromium for the run, with a fresh profile folder."""
    from selenium import webdriver
    from selenium.webdriver.chrome.service import Service

    profile = tempfile.mkdtemp(prefix="lk-chromium-")
    opts = webdriver.ChromeOptions()
    opts.binary_location = CHROMIUM
    for arg in (
        "--headless",
        "--no-sandbox",
        "--disable-gpu",
        "--disable-background-networking",
        "--disable-component-update",
        "--disable-sync",
        "--no-first-run",
        "--disable-dev-shm-usage",
        f"--user-data-dir={profile}",
        "--window-size=1280,900",
    ):
        opts.add_argument(arg)
    driver = webdriver.Chrome(service=Service(executable_path=CHROMEDRIVER), options=opts)
    driver.set_page_load_timeout(60)
    SCREENSHOTS.mkdir(parents=True, exist_ok=True)
    try:
        yield driver
    finally:
        driver.quit()
        shutil.rmtree(profile, ignore_errors=True)


@pytest.fixture()
def page(browser: object, server: Server) -> Iterator[object]:
    """The browser signed out, at desktop width, before each test."""
    from selenium.webdriver.remote.webdriver import WebDriver

    assert isinstance(browser, WebDriver)
    browser.get(f"{server.base}/sign-in")
    browser.delete_all_cookies()
    browser.execute_cdp_cmd("Emulation.clearDeviceMetricsOverride", {})
    yield browser
