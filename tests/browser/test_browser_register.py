"""In headless Chromium: the fixture register, a bad CSV upload, QR labels, weekly runs."""

from __future__ import annotations

import re
import tempfile
from pathlib import Path
from typing import Any

from selenium.webdriver.common.by import By
from selenium.webdriver.support import expected_conditions as ec
from sqlalchemy import func, select
from sqlalchemy.orm import Session

from tests.browser.conftest import Server
from tests.browser.test_browser_pages import _shot, _wait, sign_in


def _fixture_count(server: Server) -> int:
    from service.db.session import make_engine
    from service.register.models import Fixture

    engine = make_engine(server.db_url)
    with Session(engine) as s:
        n = int(s.scalar(select(func.count()).select_from(Fixture)) or 0)
    engine.dispose()
    return n


def _first_site_area_type(server: Server) -> tuple[str, str, str, int]:
    from service.catalogue.models import LampType
    from service.db.session import make_engine
    from service.register.models import Area, Fixture, Site

    engine = make_engine(server.db_url)
    with Session(engine) as s:
        row = s.execute(
            select(Site.name, Area.name, LampType.code, Area.id)
            .join(Area, Area.site_id == Site.id)
            .join(Fixture, Fixture.area_id == Area.id)
            .join(LampType, LampType.id == Fixture.lamp_type_id)
            .order_by(Area.id)
        ).first()
    engine.dispose()
    assert row is not None
    return str(row[0]), str(row[1]), str(row[2]), int(row[3])


def test_register_search_and_bad_csv_upload_writes_nothing(page: Any, server: Server) -> None:
    site, area, code, area_id = _first_site_area_type(server)
    sign_in(page, server, "pela")
    page.get(f"{server.base}/app/fixtures?area_id={area_id}")
    caption = page.find_element(By.CSS_SELECTOR, "#fixtures caption").text
    assert re.match(r"\d+ fixtures", caption)
    _shot(page, "fixture-register")
    before = _fixture_count(server)
    folder = Path(tempfile.mkdtemp(prefix="lk-csv-"))
    csv = folder / "new-fixtures.csv"
    csv.write_text(
        "site,area,tag,lamp_type,lamps_per_fixture\n"
        f'"{site}","{area}",UP-1,{code},1\n'
        f'"{site}","{area}",UP-2,{code},many\n'
    )
    page.get(f"{server.base}/app/fixtures/import")
    page.find_element(By.ID, "file").send_keys(str(csv))
    page.find_element(By.CSS_SELECTOR, "#import-form button[type=submit]").click()
    table = _wait(page).until(ec.presence_of_element_located((By.ID, "row-errors")))
    cells = [
        [td.text for td in tr.find_elements(By.TAG_NAME, "td")]
        for tr in table.find_elements(By.CSS_SELECTOR, "tbody tr")
    ]
    assert ["3", "lamps_per_fixture"] in [c[:2] for c in cells]  # line 3 of the file
    assert "Nothing was imported" in page.find_element(By.ID, "import-error").text
    _shot(page, "fixture-import-row-errors")
    assert _fixture_count(server) == before  # the good row was not written either


def test_label_sheet_and_runs_page(page: Any, server: Server) -> None:
    _, _, _, area_id = _first_site_area_type(server)
    sign_in(page, server, "pela")
    page.get(f"{server.base}/app/areas/{area_id}/labels")
    labels = page.find_elements(By.CSS_SELECTOR, "#labels li.label")
    assert labels and all(lb.find_elements(By.TAG_NAME, "svg") for lb in labels)
    url = labels[0].find_element(By.CSS_SELECTOR, ".label-url").text
    assert "/f/" in url
    _shot(page, "qr-labels")
    page.get(url)  # what a phone opens from the code
    assert page.title.startswith("Fixture ")
    page.get(f"{server.base}/app/runs")
    page.find_element(By.CSS_SELECTOR, "#start-run button[type=submit]").click()
    _wait(page).until(ec.url_contains("started="))
    first = page.find_element(By.CSS_SELECTOR, "#runs tbody tr").text
    assert "succeeded" in first or "skipped" in first, first
    _shot(page, "weekly-runs")
