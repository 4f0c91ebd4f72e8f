"""The briefing view and the exports in Chromium: a finished fit, a running one, bad ids, the offline report."""

from __future__ import annotations

import csv
import io
import json
import re
import time

import pytest

from bendline.app import wording
from bendline.app.reports import TABLES
from bendline.inference.result import CAUTIONS

from .conftest import Server, hold_fit_open, wait_for_graph

pytestmark = [pytest.mark.browser, pytest.mark.slow]
SIZES = ((1920, 1080), (1280, 800))
EXPORT_FILES = ("report.html", "result.json") + tuple(f"{t}.csv" for t in TABLES)


@pytest.fixture
def demo(tmp_path):
    data = tmp_path / "data"
    data.mkdir()
    srv = Server(data, "--demo").start()
    yield srv
    srv.stop()


def watch(pg):
    """Console errors and failed requests of a page we opened ourselves."""
    errors, failed = [], []
    pg.on("console", lambda m: errors.append(m.text) if m.type == "error" else None)
    pg.on("pageerror", lambda e: errors.append(str(e)))
    pg.on("requestfailed", lambda r: failed.append(r.url))
    return errors, failed


def wait_for(check, what, timeout=90.0):
    deadline = time.time() + timeout
    last = None
    while time.time() < deadline:
        last = check()
        if last:
            return last
        time.sleep(0.25)
    raise AssertionError(f"{what() if callable(what) else what} never happened (last: {last!r})")


def text_of(pg, selector):
    loc = pg.locator(selector)
    return loc.first.text_content() if loc.count() else ""


def start_fit(page, server, hold_open=False):
    """Fit the demo series from the dashboard; returns the run id.

    ``hold_open`` keeps the fit sampling until the test stops it.
    """
    page.goto(server.url)
    wait_for_graph(page)
    wait_for(lambda: "273 days" in page.inner_text("#series-info"), "the demo series loading")
    if hold_open:
        hold_fit_open(page)
    page.click("#fit-button")
    m = wait_for(lambda: re.search(r"run=([0-9a-f]{16})", page.evaluate("location.search")),
                 lambda: f"the run starting (progress {page.inner_text('#progress')!r}, "
                         f"error {page.inner_text('#fit-error')!r})", 180)
    return m.group(1)


def open_brief(page, server, run_id, size):
    pg = page.context.new_page()
    pg.set_default_timeout(60000)
    log = watch(pg)
    pg.set_viewport_size({"width": size[0], "height": size[1]})
    pg.goto(f"{server.url}/brief/{run_id}")
    wait_for_graph(pg, "#brief-main-chart")
    wait_for(lambda: "data through" in text_of(pg, "#brief-title"), "the briefing title")
    return pg, log


def shown_headline(pg):
    """(label, value, detail) of each headline card (text as in the DOM, not as CSS capitalises it)."""
    out = []
    for card in pg.locator("#brief-headline .brief-stat:not(.brief-withheld)").all():
        out.append(tuple(card.locator(sel).text_content() for sel in
                         (".brief-stat-label", ".brief-stat-value", ".brief-stat-sub")))
    return out


def check_fits(pg, size, path):
    """Headline and main chart inside the viewport, no page scroll needed; screenshot to ``path``."""
    pg.set_viewport_size({"width": size[0], "height": size[1]})
    svg = "#brief-main-chart .main-svg"
    wait_for(lambda: pg.locator(svg).first.bounding_box()["width"] <= size[0], f"the chart fitting {size}", 30)
    time.sleep(0.5)  # let Plotly finish its resize before the picture
    pg.screenshot(path=str(path))
    assert pg.evaluate("window.scrollY") == 0
    for sel in ("#brief-title", "#brief-badge", "#brief-headline", svg):
        box = pg.locator(sel).first.bounding_box()
        assert box is not None, sel
        assert box["x"] >= 0 and box["y"] >= 0, (sel, box)
        assert box["x"] + box["width"] <= size[0] + 1, (sel, box, size)
        assert box["y"] + box["height"] <= size[1] + 1, (sel, box, size)
    assert pg.locator(svg).first.bounding_box()["height"] >= 250  # a chart, not a sliver
    assert pg.evaluate("document.documentElement.scrollWidth") <= size[0]
    value_px = pg.evaluate("parseFloat(getComputedStyle(document.querySelector('.brief-stat-value')).fontSize)")
    assert value_px >= (32 if size[0] >= 1920 else 24)  # readable from the back of the room


def get(page, server, run_id, file):
    resp = page.request.get(f"{server.url}/download/{run_id}/{file}")
    return resp


def check_headline_is_the_results(pg, result):
    cur = result["current"]["growth_rate_per_day"]
    expected_rate = f"{wording.fmt_pct(wording.pct_per_day(cur['median']))} per day"
    shown = shown_headline(pg)
    assert shown and shown[0][1] == expected_rate
    assert shown == [tuple(s) for s in wording.headline_stats(result)]


def test_briefing_view_of_a_finished_fit_and_its_exports(demo, page, browser, tmp_path):
    run_id = start_fit(page, demo)
    wait_for(lambda: re.match(r"^(Converged|Not converged)", page.inner_text("#progress")), "the fit finishing", 180)
    wait_for(lambda: "/download/" in (page.get_attribute("#export-report", "href") or ""), "the export links")
    assert "disabled" not in page.get_attribute("#export-report", "class")
    resp = get(page, demo, run_id, "result.json")
    assert resp.status == 200
    result = json.loads(resp.text())

    pg, (errors, failed) = open_brief(page, demo, run_id, SIZES[0])
    ok = result["diagnostics"]["reportable"]
    assert text_of(pg, "#brief-badge") == ("Reportable" if ok else "Not reportable: do not report these numbers")
    for w in result["diagnostics"]["warnings"]:  # the verdict's reasons, beside the numbers
        assert w["message"] in text_of(pg, "#brief-warnings")
    assert wording.fmt_date(result["series"]["end"]) in text_of(pg, "#brief-title")
    assert result["series"]["name"] in text_of(pg, "#brief-title")
    check_headline_is_the_results(pg, result)
    assert text_of(pg, "#brief-summary").endswith(result["summary_text"])
    assert "if the current trend continues" in text_of(pg, "#brief-main-chart")
    wait_for_graph(pg, "#brief-rates-chart")
    footer = text_of(pg, "#brief-footer")
    for line in list(CAUTIONS) + result["assumptions"] + [run_id]:
        assert line in footer
    assert not pg.locator("#brief-root input, #brief-root button, #brief-root select").count()  # nothing to edit
    for w, h in SIZES:
        check_fits(pg, (w, h), tmp_path / f"brief-finished-{w}x{h}.png")

    # every export downloads and parses
    files = {}
    for file in EXPORT_FILES:
        resp = get(page, demo, run_id, file)
        assert resp.status == 200, file
        disp = resp.headers["content-disposition"]
        assert disp.startswith("attachment") and run_id in disp and "daily_admissions" in disp
        files[file] = resp.text()
    assert json.loads(files["result.json"]) == result
    for table in TABLES:
        rows = list(csv.DictReader(io.StringIO(files[f"{table}.csv"])))
        assert rows, table
    segs = list(csv.DictReader(io.StringIO(files["segments.csv"])))
    assert [float(r["growth_rate_per_day_median"]) for r in segs] == \
        [s["growth_rate_per_day"]["median"] for s in result["segments"]]
    band = list(csv.DictReader(io.StringIO(files["band.csv"])))
    assert len(band) == len(result["band"]["dates"])
    with page.expect_download() as dl:  # the dashboard's link itself
        page.click("#export-report")
    assert dl.value.suggested_filename.endswith(f"{run_id}-report.html")
    report = tmp_path / "report.html"
    dl.value.save_as(str(report))
    assert "id=\"headline\"" in report.read_text(encoding="utf-8")

    # the report renders with the network cut off
    offline = browser.new_context(viewport={"width": 1280, "height": 900})
    try:
        offline.route("**/*", lambda route: route.abort())
        rp = offline.new_page()
        rp.set_default_timeout(60000)
        r_errors, r_failed = watch(rp)
        rp.set_content(files["report.html"], wait_until="load")
        rp.wait_for_selector("#report-main .main-svg")
        rp.wait_for_selector("#report-rates .main-svg")
        assert rp.locator(".main-svg").count() >= 2
        assert result["series"]["name"] in rp.locator("#title").text_content()
        rp.screenshot(path=str(tmp_path / "report-offline.png"), full_page=True)
        assert r_failed == [] and r_errors == []
    finally:
        offline.close()
    assert failed == [] and errors == []
    assert page.console_errors == []


def test_briefing_view_of_a_running_fit_is_provisional_and_follows_it(demo, page, tmp_path):
    run_id = start_fit(page, demo, hold_open=True)  # still sampling while we look
    wait_for(lambda: re.search(r"Warm-up|Sampling|Finding", page.inner_text("#progress")), "the fit running", 90)
    assert "disabled" in page.get_attribute("#export-report", "class")
    assert get(page, demo, run_id, "report.html").status == 409

    pg, (errors, failed) = open_brief(page, demo, run_id, SIZES[0])
    assert text_of(pg, "#brief-badge") == "Provisional: still sampling"
    assert text_of(pg, "#brief-status").startswith("Provisional")
    wait_for(lambda: shown_headline(pg), "the first provisional numbers")
    assert text_of(pg, "#brief-summary").startswith("Provisional")
    for line in CAUTIONS:
        assert line in text_of(pg, "#brief-footer")

    def trend():
        return pg.evaluate("() => { const gd = document.querySelector('#brief-main-chart .js-plotly-plot');"
                           " return gd && gd.data ? JSON.stringify(gd.data[6].y) : null; }")

    first = trend()
    wait_for(lambda: trend() != first, "the view updating in place", 90)
    for w, h in SIZES:
        check_fits(pg, (w, h), tmp_path / f"brief-running-{w}x{h}.png")

    # stop it from the dashboard once draws are kept; the view turns final or "do not report"
    wait_for(lambda: page.inner_text("#progress").startswith("Sampling"), "draws being kept", 120)
    page.click("#stop-button")
    wait_for(lambda: page.inner_text("#progress").startswith("Stopped"), "the run stopping", 90)
    wait_for(lambda: not text_of(pg, "#brief-badge").startswith("Provisional"), "the view finishing", 60)
    assert "Stopped by request" in text_of(pg, "#brief-status")
    result = json.loads(get(page, demo, run_id, "result.json").text())
    wait_for(lambda: shown_headline(pg) == [tuple(s) for s in wording.headline_stats(result)],
             "the result's numbers", 30)
    check_headline_is_the_results(pg, result)
    if not result["diagnostics"]["reportable"]:
        assert text_of(pg, "#brief-badge") == "Not reportable: do not report these numbers"
        assert pg.locator(".brief-withheld").count() == 1
    pg.screenshot(path=str(tmp_path / "brief-stopped-1280x800.png"))

    # finished: the view stops polling
    calls = []
    pg.on("request", lambda r: calls.append(r.url) if "_dash-update-component" in r.url else None)
    time.sleep(3.0)
    assert calls == []
    assert failed == [] and errors == []
    assert page.console_errors == []


def test_briefing_and_downloads_of_bad_ids(server, page):
    for path in ("/brief/0123456789abcdef", "/brief/not-a-run", "/download/0123456789abcdef/report.html",
                 "/download/not-a-run/result.json", "/download/0123456789abcdef/secrets.csv"):
        resp = page.request.get(server.url + path)
        assert resp.status == 404, path
        assert "Traceback" not in resp.text() and ("No such run" in resp.text() or "Not found" in resp.text())
    for path in ("/brief/", "/brief/a/b", "/board/0123456789abcdef", "/nothing-here"):  # no page shell, a 404
        resp = page.request.get(server.url + path)
        assert resp.status == 404 and "Traceback" not in resp.text(), path
    response = page.goto(server.url + "/brief/")
    assert response.status == 404 and "no run with this id" in page.inner_text("body")
    # the browser logs the 404 of the page itself, and nothing else
    assert all("404" in e for e in page.console_errors), page.console_errors
