"""In a real headless Chromium: sign-in per role, a phone burnout report, refusals."""

from __future__ import annotations

import re
from itertools import pairwise
from typing import Any

import pytest
from selenium.common.exceptions import StaleElementReferenceException, WebDriverException
from selenium.webdriver.common.by import By
from selenium.webdriver.support import expected_conditions as ec
from selenium.webdriver.support.ui import Select, WebDriverWait
from sqlalchemy import select
from sqlalchemy.orm import Session

from tests.browser.conftest import SCREENSHOTS, Server

PASSWORD = "demo-lamps-2026"  # the demo people's password (service.seed.users)
ROLES = {"vika": "viewer", "tamo": "technician", "pela": "planner", "ardo": "administrator"}


def _wait(driver: Any) -> WebDriverWait:  # type: ignore[type-arg]
    # A form post replaces the page while the condition polls it: an element found in the old
    # document is then stale, or Chromium reports "Node with given id does not belong to the
    # document" (a plain WebDriverException). Both mean "not yet": keep polling until the
    # condition holds or the 30 s run out (a TimeoutException then fails the test).
    return WebDriverWait(
        driver, 30, ignored_exceptions=(StaleElementReferenceException, WebDriverException)
    )


def _shot(driver: Any, name: str) -> None:
    driver.save_screenshot(str(SCREENSHOTS / f"{name}.png"))


def sign_in(driver: Any, server: Server, username: str) -> None:
    """Fill the sign-in form and wait for the overview."""
    driver.get(f"{server.base}/sign-in")
    driver.find_element(By.ID, "username").send_keys(username)
    driver.find_element(By.ID, "password").send_keys(PASSWORD)
    driver.find_element(By.CSS_SELECTOR, "form.stack button[type=submit]").click()
    _wait(driver).until(ec.url_matches(r"/app$"))


def _fixture_with_burning_lamp(server: Server) -> tuple[int, str, int, str]:
    """(site id, site name, area id, tag) of a demo fixture whose lamps all burn."""
    from service.db.session import make_engine
    from service.register.models import Area, Fixture, LampPosition, Site

    engine = make_engine(server.db_url)
    with Session(engine) as s:
        dark = select(LampPosition.fixture_id).where(LampPosition.burned_out_at.is_not(None))
        row = s.execute(
            select(Site.id, Site.name, Area.id, Fixture.tag)
            .join(Area, Area.id == Fixture.area_id)
            .join(Site, Site.id == Fixture.site_id)
            .where(Fixture.id.not_in(dark))
            .order_by(Fixture.id)
        ).first()
    engine.dispose()
    assert row is not None
    return int(row[0]), str(row[1]), int(row[2]), str(row[3])


def _open_burnouts(driver: Any, server: Server, site_name: str) -> int:
    driver.get(f"{server.base}/app")
    for tr in driver.find_elements(By.CSS_SELECTOR, "table tbody tr"):
        if tr.find_element(By.CSS_SELECTOR, "th").text == site_name:
            return int(tr.find_elements(By.CSS_SELECTOR, "td")[0].text)
    raise AssertionError(f"site {site_name!r} not on the overview")


@pytest.mark.parametrize("username", list(ROLES))
def test_sign_in_as_each_role(page: Any, server: Server, username: str) -> None:
    sign_in(page, server, username)
    header = page.find_element(By.CSS_SELECTOR, "header.top").text
    assert f"({ROLES[username]})" in header
    assert page.find_element(By.TAG_NAME, "h1").text == "Portfolio overview"
    _shot(page, f"sign-in-{ROLES[username]}")


def test_report_burnout_at_phone_width(page: Any, server: Server) -> None:
    site_id, site_name, area_id, tag = _fixture_with_burning_lamp(server)
    sign_in(page, server, "tamo")
    before = _open_burnouts(page, server, site_name)
    page.execute_cdp_cmd(
        "Emulation.setDeviceMetricsOverride",
        {"width": 360, "height": 780, "deviceScaleFactor": 2, "mobile": True},
    )
    page.get(f"{server.base}/app/report")
    assert page.execute_script("return window.innerWidth") == 360
    Select(page.find_element(By.ID, "site_id")).select_by_value(str(site_id))
    page.find_element(By.ID, "tag").send_keys(tag)
    page.find_element(By.CSS_SELECTOR, "main form button[type=submit]").click()
    _wait(page).until(ec.title_contains(f"Fixture {tag}"))
    # Large targets: the send button spans a thumb's height and nothing overflows sideways.
    send = page.find_element(By.CSS_SELECTOR, "main form button[type=submit]")
    assert send.size["height"] >= 48
    assert page.execute_script("return document.documentElement.scrollWidth") <= 360
    page.find_element(By.CSS_SELECTOR, "input[name=position_id]:not([disabled])").click()
    page.find_element(By.ID, "note").send_keys("dark since the night shift")
    _shot(page, "report-phone-form")
    send.click()
    _wait(page).until(ec.title_contains("Reported"))
    assert "Burnout recorded" in page.find_element(By.TAG_NAME, "h1").text
    _shot(page, "report-phone-done")
    page.execute_cdp_cmd("Emulation.clearDeviceMetricsOverride", {})
    assert _open_burnouts(page, server, site_name) == before + 1
    page.get(f"{server.base}/app/areas/{area_id}")
    reports = page.find_element(By.ID, "area-reports").text
    assert tag in reports and "open" in reports


def _post(driver: Any, path: str, fields: dict[str, str]) -> int:
    """POST a form from the page's own origin (with its cookie); the HTTP status."""
    return int(
        driver.execute_async_script(
            "const [path, fields, done] = arguments;"
            "fetch(path, {method: 'POST', body: new URLSearchParams(fields),"
            " redirect: 'manual', credentials: 'same-origin'})"
            ".then(r => done(r.status)).catch(() => done(-1));",
            path,
            fields,
        )
    )


def _page_csrf(driver: Any) -> str:
    return str(
        driver.find_element(By.CSS_SELECTOR, "form.signout input[name=csrf_token]").get_attribute(
            "value"
        )
    )


def test_viewer_sees_no_write_buttons_and_forged_posts_fail(page: Any, server: Server) -> None:
    _, _, _, tag = _fixture_with_burning_lamp(server)
    sign_in(page, server, "vika")
    page.get(f"{server.base}/app/work-orders/{server.order_id}")
    assert "draft" in page.find_element(By.TAG_NAME, "main").text
    # The only form a viewer sees is the sign-out in the header.
    assert page.find_elements(By.CSS_SELECTOR, "main form") == []
    _shot(page, "viewer-order")
    site_id, _, _, tag = _fixture_with_burning_lamp(server)
    page.get(f"{server.base}/f/{site_id}/{tag}")
    assert page.find_elements(By.CSS_SELECTOR, "main form") == []
    assert "can look but not report" in page.find_element(By.TAG_NAME, "main").text
    # A forged POST with the viewer's own valid CSRF token is still refused by role.
    token = _page_csrf(page)
    assert _post(page, "/app/report", {"position_id": "1", "csrf_token": token}) == 403
    order_url = f"/app/work-orders/{server.order_id}/issued"
    assert _post(page, order_url, {"csrf_token": token}) == 403
    page.get(f"{server.base}/app/work-orders/{server.order_id}")
    assert "draft" in page.find_element(By.TAG_NAME, "main").text  # nothing changed


def test_form_without_csrf_token_is_refused(page: Any, server: Server) -> None:
    sign_in(page, server, "pela")
    page.get(f"{server.base}/app/work-orders/{server.order_id}")
    form = page.find_element(By.CSS_SELECTOR, f"main form[action$='/{server.order_id}/issued']")
    page.execute_script("arguments[0].querySelector('input[name=csrf_token]').remove()", form)
    form.find_element(By.CSS_SELECTOR, "button").click()
    _wait(page).until(ec.title_contains("Not allowed"))
    assert "CSRF" in page.find_element(By.TAG_NAME, "main").text
    _shot(page, "csrf-refused")
    assert _post(page, f"/app/work-orders/{server.order_id}/issued", {}) == 403
    page.get(f"{server.base}/app/work-orders/{server.order_id}")
    assert "draft" in page.find_element(By.TAG_NAME, "main").text


def _chart(driver: Any, chart_id: str) -> dict[str, Any]:
    """What the drawn uPlot instance holds: its data, series labels, canvas size and ink."""
    _wait(driver).until(
        lambda d: d.execute_script(f"return !!(window.lkCharts||{{}})['{chart_id}']")
    )
    got: dict[str, Any] = driver.execute_script(
        "const u = window.lkCharts[arguments[0]];"
        "const c = u.root.querySelector('canvas');"
        "const px = c.getContext('2d').getImageData(0, 0, c.width, c.height).data;"
        "let ink = 0; for (let i = 3; i < px.length; i += 4) { if (px[i] > 0) ink++; }"
        "const spec = JSON.parse(document.getElementById(arguments[0]).parentNode"
        ".querySelector('script.chart-data').textContent);"
        "return {data: u.data, labels: u.series.map(s => s.label), width: c.width,"
        " ink: ink, spec: spec.data, axes: u.root.querySelectorAll('.u-label').length};",
        chart_id,
    )
    return got


def test_overview_and_area_charts_hold_the_demo_points(page: Any, server: Server) -> None:
    sign_in(page, server, "pela")
    weekly = _chart(page, "weekly-burnouts")
    assert weekly["data"] == weekly["spec"]  # the drawn chart holds the server's numbers
    assert weekly["data"][0] == list(range(1, 27))  # 26 weeks
    burnouts = [v for col in weekly["data"][1:-1] for v in col if v is not None]
    assert len(burnouts) >= 26 and all(v >= 0 for v in burnouts) and sum(burnouts) > 0
    assert weekly["width"] > 0 and weekly["ink"] > 1000  # pixels were drawn
    assert any("Group relamps due" in str(lbl) for lbl in weekly["labels"])
    page.execute_script("document.getElementById('weekly-burnouts').scrollIntoView()")
    _shot(page, "overview-chart")
    area_link = page.find_element(By.CSS_SELECTOR, "#areas-due a")
    area_link.click()
    _wait(page).until(ec.presence_of_element_located((By.ID, "plan-summary")))
    assert "burn hours" in page.find_element(By.ID, "plan-summary").text
    ids = page.execute_script("return Object.keys(window.lkCharts)")
    survival = _chart(page, next(i for i in ids if i.startswith("survival-")))
    here, catalogue = survival["data"][1], survival["data"][2]
    assert here[0] == 1.0 and catalogue[0] == 1.0  # S(0) = 1
    assert all(a >= b for a, b in pairwise(here))  # S(t) never rises
    assert survival["ink"] > 1000
    cost = _chart(page, next(i for i in ids if i.startswith("cost-")))
    c_t, spot, chosen = cost["data"][1], cost["data"][2], cost["data"][3]
    marked = [(x, y) for x, y in zip(cost["data"][0], chosen, strict=True) if y is not None]
    assert len(marked) == 1  # the chosen interval, on the curve and below the spot line
    assert marked[0][1] in c_t and marked[0][1] <= spot[0]
    assert cost["data"] == cost["spec"]
    page.execute_script("document.querySelector('.charts').scrollIntoView()")
    _shot(page, "area-charts")
    page.find_element(By.LINK_TEXT, "Lamp types").click()
    page.find_element(By.CSS_SELECTOR, "#lamp-types tbody a").click()
    fit_id = _wait(page).until(
        lambda d: next(iter(d.execute_script("return Object.keys(window.lkCharts||{})")), None)
    )
    fit = _chart(page, fit_id)
    assert fit["data"] == fit["spec"] and fit["ink"] > 1000
    assert fit["labels"][1] == "Catalogue Weibull" and fit["data"][1][0] == 1.0
    _shot(page, "lamp-type-field-fit")


def _order_facts(server: Server, order_id: int) -> tuple[int, int]:
    """(area id, lamp type id of its first line) of an order."""
    from service.db.session import make_engine
    from service.workorders.models import WorkOrder, WorkOrderLine

    engine = make_engine(server.db_url)
    with Session(engine) as s:
        area_id = s.scalar(select(WorkOrder.area_id).where(WorkOrder.id == order_id))
        lamp_type_id = s.scalar(
            select(WorkOrderLine.lamp_type_id)
            .where(WorkOrderLine.work_order_id == order_id)
            .order_by(WorkOrderLine.id)
        )
    engine.dispose()
    assert area_id is not None and lamp_type_id is not None
    return int(area_id), int(lamp_type_id)


def _fit_counts(driver: Any, server: Server, lamp_type_id: int) -> tuple[int, int]:
    """(failures, censored) on a lamp type's field-fit page."""
    driver.get(f"{server.base}/app/lamp-types/{lamp_type_id}")
    m = re.search(
        r"(\d+) failures and (\d+) censored", driver.find_element(By.ID, "fit-summary").text
    )
    assert m
    return int(m.group(1)), int(m.group(2))


def _lamp_ages(server: Server, area_id: int, tag: str) -> dict[int, float]:
    """Burn hours of each lamp of one fixture by position number, as the service computes them."""
    from service.db.session import make_engine
    from service.readings.ages import position_ages
    from service.register.models import Fixture, LampPosition

    engine = make_engine(server.db_url)
    with Session(engine) as s:
        fid = s.scalar(select(Fixture.id).where(Fixture.area_id == area_id, Fixture.tag == tag))
        assert fid is not None
        ages = position_ages(s, fixture_id=int(fid))
        number = dict(
            s.execute(
                select(LampPosition.id, LampPosition.position_no).where(
                    LampPosition.fixture_id == fid
                )
            ).all()
        )
    engine.dispose()
    return {number[int(p)]: float(a) for p, a in zip(ages.position_id, ages.age_h, strict=True)}


def _oldest_by_tag(driver: Any, server: Server, area_id: int) -> dict[str, float]:
    """Each fixture's oldest lamp in burn hours, from the area page."""
    driver.get(f"{server.base}/app/areas/{area_id}")
    out = {}
    for tr in driver.find_elements(By.CSS_SELECTOR, "#area-fixtures tbody tr"):
        cells = [td.text for td in tr.find_elements(By.TAG_NAME, "td")]
        out[cells[0]] = float(cells[4].replace(",", ""))
    return out


def test_technician_completes_an_order_found_dark_and_skipped(page: Any, server: Server) -> None:
    oid = server.second_order_id
    area_id, lamp_type_id = _order_facts(server, oid)
    sign_in(page, server, "pela")  # a planner issues the order
    failures, censored = _fit_counts(page, server, lamp_type_id)
    ages = _oldest_by_tag(page, server, area_id)
    page.get(f"{server.base}/app/work-orders/{oid}")
    page.find_element(By.CSS_SELECTOR, f"form[action$='/{oid}/issued'] button").click()
    _wait(page).until(ec.text_to_be_present_in_element((By.ID, "order-state"), "issued"))
    page.delete_all_cookies()
    sign_in(page, server, "tamo")  # the technician starts and completes it
    page.get(f"{server.base}/app/work-orders/{oid}")
    assert page.find_elements(By.CSS_SELECTOR, "form[action$='/cancel']") == []  # planner+
    page.find_element(By.CSS_SELECTOR, f"form[action$='/{oid}/in_progress'] button").click()
    _wait(page).until(ec.text_to_be_present_in_element((By.ID, "order-state"), "in_progress"))
    assert "Isolate and lock off the power" in page.find_element(By.TAG_NAME, "main").text
    form = page.find_element(By.CSS_SELECTOR, "form.complete")
    rows = form.find_elements(By.CSS_SELECTOR, "tbody tr")
    tags = [r.find_element(By.TAG_NAME, "th").text.split("\n")[0] for r in rows]
    assert len(rows) >= 4 and tags[0] == tags[1]  # a multi-lamp fixture, one row per lamp
    lamps_before = _lamp_ages(server, area_id, tags[0])
    # The first fixture: its first lamp found dark, its second skipped, the rest replaced.
    Select(rows[0].find_element(By.TAG_NAME, "select")).select_by_value("found_dark")
    Select(rows[1].find_element(By.TAG_NAME, "select")).select_by_value("skipped")
    rows[1].find_element(By.CSS_SELECTOR, "input[name=position_reason]").send_keys(
        "holder cracked, needs an electrician"
    )
    _shot(page, "order-complete-form")
    form.find_element(By.CSS_SELECTOR, "button[type=submit]").click()
    _wait(page).until(ec.text_to_be_present_in_element((By.ID, "order-state"), "done"))
    lines = page.find_element(By.TAG_NAME, "main").text
    assert "partial: holder cracked, needs an electrician" in lines
    assert "position 1: found dark" in lines and "position 2: skipped" in lines
    _shot(page, "order-done")
    # The field fit counts the found-dark lamp as a failure, the replaced ones as censored.
    after_failures, after_censored = _fit_counts(page, server, lamp_type_id)
    assert after_failures == failures + 1
    assert after_censored > censored
    _shot(page, "lamp-type-fit-after-order")
    # Ages: every fully relamped fixture restarts; the skipped lamp keeps the first one old.
    after = _oldest_by_tag(page, server, area_id)
    others = [t for t in dict.fromkeys(tags) if t != tags[0]]
    assert others and all(ages[t] >= 1 for t in others)
    assert all(after[t] < 1 for t in others)  # new lamps: under one burn hour old
    # The first fixture: the found-dark lamp (position 1) is new, the skipped one (position 2)
    # keeps its own age (the test runs in seconds, so it gains well under a burn hour), and
    # the area page's "oldest lamp" of that fixture is the skipped lamp's age.
    lamps_after = _lamp_ages(server, area_id, tags[0])
    assert lamps_after[1] < 1
    assert lamps_before[2] >= 1 and abs(lamps_after[2] - lamps_before[2]) < 1
    assert after[tags[0]] == pytest.approx(lamps_after[2], abs=1)
    _shot(page, "area-after-order")
