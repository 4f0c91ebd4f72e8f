"""Two people, two browsers: one starts a fit on a worker, the other watches it live."""

from __future__ import annotations

import os
import re
import time

import pytest

from ..browser.conftest import CHROME_ARGS, CHROMIUM, ROOT, graph_data, hold_fit_open, wait_for_graph
from ..browser.test_dashboard import trend_points, wait_text
from .conftest import ADMIN, ADMIN_PW, USER, USER_PW

pytestmark = [pytest.mark.team, pytest.mark.browser, pytest.mark.slow]
SAMPLE = os.path.join(ROOT, "sample_series", "daily_admissions.csv")


@pytest.fixture
def two_browsers(playwright_driver):
    # Both from the session's one Playwright driver: a second sync_playwright()
    # while the first is alive fails ("Sync API inside the asyncio loop").
    a = playwright_driver.chromium.launch(executable_path=CHROMIUM, args=CHROME_ARGS, headless=True)
    b = playwright_driver.chromium.launch(executable_path=CHROMIUM, args=CHROME_ARGS, headless=True)
    yield a, b
    a.close()
    b.close()


def _page(browser):
    pg = browser.new_context(viewport={"width": 1280, "height": 900}).new_page()
    pg.set_default_timeout(30000)
    pg.console_errors = []
    pg.on("console", lambda m: pg.console_errors.append(m.text) if m.type == "error" else None)
    pg.on("pageerror", lambda e: pg.console_errors.append(str(e)))
    return pg


def _sign_in(page, url, name, password):
    page.goto(url + "/")
    page.wait_for_url(re.compile(r".*/login.*"))
    page.fill("#name", name)
    page.fill("#password", password)
    page.click("button[type=submit]")
    try:
        wait_for_graph(page)
    except Exception as exc:  # say where the page stood: the address, its text, its console
        raise AssertionError(f"no main chart after signing in as {name}: at {page.url}; page text "
                             f"{page.inner_text('body')[:300]!r}; console errors {page.console_errors[:3]}") from exc
    assert f"Signed in as {name}" in page.inner_text(".header")


def test_a_second_person_watches_a_fit_the_first_started(team_server, workers, two_browsers):
    workers("w1")
    ana = _page(two_browsers[0])
    bo = _page(two_browsers[1])
    _sign_in(ana, team_server.url, ADMIN, ADMIN_PW)
    _sign_in(bo, team_server.url, USER, USER_PW)
    ana.set_input_files("#upload input[type=file]", SAMPLE)
    wait_text(ana, "#series-info", r"273 days")
    hold_fit_open(ana)  # still sampling while bo watches, on any machine
    ana.click("#fit-button")
    wait_text(ana, "#progress", r"Warm-up|Sampling|Finding|Queued", timeout=60)
    run_id = re.search(r"run=([0-9a-f]{16})", ana.url).group(1)
    # bo finds it in the shared run list and opens it
    deadline = time.time() + 30
    while time.time() < deadline and not bo.query_selector(f"#run-list a[href='/?run={run_id}']"):
        bo.click("#refresh-runs")
        time.sleep(1.0)
    bo.click(f"#run-list a[href='/?run={run_id}']")
    wait_text(bo, "#progress", r"Sampling|Warm-up", timeout=90)
    deadline = time.time() + 60
    while trend_points(bo) == 0 and time.time() < deadline:
        time.sleep(0.3)
    first = trend_points(bo)
    assert first > 200
    assert "Provisional" in bo.inner_text("#status-banner")
    it1 = bo.inner_text("#progress")
    deadline = time.time() + 30
    while bo.inner_text("#progress") == it1 and time.time() < deadline:
        time.sleep(0.3)
    assert bo.inner_text("#progress") != it1  # bo's panels follow the run live
    assert bo.is_disabled("#stop-button")  # only the owner (or an admin) stops a run
    assert ADMIN in bo.inner_text("#run-list")  # runs show their owner
    wait_text(bo, "#progress", r"^Sampling", timeout=90)  # stop once draws are being kept
    ana.click("#stop-button")
    wait_text(bo, "#progress", r"^Stopped", timeout=60)
    hist = graph_data(bo, "#change-date-chart") or []
    assert any(t["nonnull"] > 0 for t in hist), (bo.inner_text("#progress"), bo.inner_text("#status-banner"), hist)
    assert ana.console_errors == [] and bo.console_errors == []
