"""Whole user paths in Chromium: upload, change dates, fit, watch, stop, reopen."""

from __future__ import annotations

import os
import re
import time

import pytest

from .conftest import ROOT, Server, graph_data, hold_fit_open, wait_for_graph

pytestmark = [pytest.mark.browser, pytest.mark.slow]
SAMPLE = os.path.join(ROOT, "sample_series", "daily_admissions.csv")


def upload(page, path):
    page.set_input_files("#upload input[type=file]", path)


def wait_text(page, selector, pattern, timeout=60.0):
    deadline = time.time() + timeout
    text = ""
    while time.time() < deadline:
        text = page.inner_text(selector)
        if re.search(pattern, text):
            return text
        time.sleep(0.2)
    raise AssertionError(f"{selector} never matched {pattern!r}; last text: {text!r}")


def change_dates_text(page, timeout=60.0):
    """The tentative change dates as their date fields show them (waits until there is one)."""
    deadline = time.time() + timeout
    while True:
        text = " ".join(page.eval_on_selector_all("#change-date-list .change-date input", "els => els.map(e => e.value)"))
        if re.search(r"\d{4}-\d\d-\d\d", text) or time.time() > deadline:
            return text
        time.sleep(0.2)


def trend_points(page):
    data = graph_data(page) or []
    band = [t for t in data if t["name"] and "trend: 90% interval" in t["name"]]
    return band[0]["nonnull"] if band else 0


def test_upload_add_drag_fit_watch_stop_reopen(server, page):
    page.goto(server.url)
    wait_for_graph(page)
    upload(page, SAMPLE)
    wait_text(page, "#series-info", r"273 days")
    assert "negative count" in page.inner_text("#data-notes")
    # add a tentative change date with the button, then drag its line
    page.click("#add-change-date")
    before = change_dates_text(page)
    first_date = re.search(r"\d{4}-\d\d-\d\d", before).group(0)
    page.wait_for_selector(".shapelayer path[data-index='0']", state="attached")
    time.sleep(1.0)
    box = page.locator(".shapelayer path[data-index='0']").first.bounding_box()
    x, y = box["x"] + box["width"] / 2, box["y"] + box["height"] / 2
    page.mouse.move(x, y)
    page.mouse.down()
    page.mouse.move(x - 60, y, steps=8)
    page.mouse.up()
    after = change_dates_text(page)
    deadline = time.time() + 15
    while re.search(r"\d{4}-\d\d-\d\d", after).group(0) == first_date and time.time() < deadline:
        time.sleep(0.3)
        after = change_dates_text(page)
    moved = re.search(r"\d{4}-\d\d-\d\d", after).group(0)
    assert moved < first_date, (first_date, moved)  # dragged left: an earlier date, whole days
    assert page.input_value("#segments") == "2"
    hold_fit_open(page)  # still sampling while we look, on any machine
    page.click("#fit-button")
    wait_text(page, "#progress", r"Warm-up|Sampling|Finding", timeout=60)
    deadline = time.time() + 60
    while trend_points(page) == 0 and time.time() < deadline:
        time.sleep(0.25)
    assert trend_points(page) > 200
    progress = page.inner_text("#progress")
    assert not progress.startswith(("Converged", "Stopped", "Not converged")), progress
    assert "Provisional" in page.inner_text("#status-banner")
    # the other panels follow the first band on the next poll (a fraction of a second)
    deadline = time.time() + 15
    hist = graph_data(page, "#change-date-chart") or []
    while not any(t["nonnull"] > 0 for t in hist) and time.time() < deadline:
        time.sleep(0.25)
        hist = graph_data(page, "#change-date-chart") or []
    assert any(t["nonnull"] > 0 for t in hist)
    assert not page.inner_text("#progress").startswith(("Converged", "Stopped", "Not converged"))
    wait_text(page, "#progress", r"^Sampling", timeout=90)  # stop once draws are being kept
    page.click("#stop-button")
    wait_text(page, "#progress", r"^Stopped", timeout=60)
    run_id = re.search(r"run=([0-9a-f]{16})", page.url).group(1)
    # a second tab opens the run from the list and gets its panels back
    other = page.context.new_page()
    other.goto(server.url)
    wait_for_graph(other)
    other.wait_for_selector("#run-list a.run-item")
    other.click(f"#run-list a[href='/?run={run_id}']")
    deadline = time.time() + 30
    while run_id not in other.url and time.time() < deadline:
        time.sleep(0.2)
    assert run_id in other.url
    wait_text(other, "#progress", r"^Stopped")
    assert trend_points(other) > 200
    assert "Stopped by request" in other.inner_text("#status-banner")
    assert page.console_errors == []


def test_malformed_upload_shows_the_problem_and_keeps_the_series(server, page, tmp_path):
    page.goto(server.url)
    wait_for_graph(page)
    upload(page, SAMPLE)
    wait_text(page, "#series-info", r"273 days")
    bad = tmp_path / "bad.csv"
    bad.write_text("date,cases\n2026-01-01,4\n2026-01-02,lots\n2026-01-03,5\n")
    upload(page, str(bad))
    msg = wait_text(page, "#data-error", r"row 3")
    assert "lots" in msg and "cases" in msg
    assert "273 days" in page.inner_text("#series-info")  # what was on screen is kept
    assert page.console_errors == []


def test_a_run_survives_a_server_restart(tmp_path, page):
    data = tmp_path / "restart"
    data.mkdir()
    first = Server(data, "--demo").start()
    try:
        page.goto(first.url)
        wait_for_graph(page)
        wait_text(page, "#series-info", r"273 days")
        page.click("#fit-button")
        wait_text(page, "#progress", r"^(Converged|Not converged)", timeout=120)
        run_url = page.url
    finally:
        first.stop()
    second = Server(data).start()
    try:
        page.goto("about:blank")
        page.console_errors.clear()  # the old page's polls failed while its server was down
        page.goto(run_url.replace(f":{first.port}", f":{second.port}"))
        wait_for_graph(page)
        wait_text(page, "#progress", r"^(Converged|Not converged)")
        assert trend_points(page) > 200
    finally:
        second.stop()
    assert page.console_errors == []


def fit_in_view(page):
    """(in view, detail): the Fit button lies inside the viewport and nothing covers its middle."""
    return page.evaluate("""() => {
        const b = document.getElementById('fit-button'), r = b.getBoundingClientRect();
        const x = r.left + r.width / 2, y = r.top + r.height / 2;
        const top = document.elementFromPoint(x, y);
        const inside = r.top >= 0 && r.left >= 0 && r.bottom <= innerHeight && r.right <= innerWidth;
        return [inside && top !== null && (top === b || b.contains(top)),
                [Math.round(r.top), Math.round(r.bottom), innerHeight, top ? top.tagName + '#' + top.id : null]];
    }""")


def spreads_and_fields(page):
    """The spread shadings as drawn ([x0, x1] dates) and as the fields say (date ± spread, as [x0, x1])."""
    drawn = page.evaluate("""() => {
        const gd = document.querySelector('#main-chart .js-plotly-plot');
        return (gd.layout.shapes || []).filter(s => (s.name || '').endsWith('± spread'))
            .map(s => [String(s.x0).slice(0, 10), String(s.x1).slice(0, 10)]);
    }""")
    dates = page.eval_on_selector_all("#change-date-list .change-date input", "els => els.map(e => e.value)")
    spreads = page.eval_on_selector_all("#change-date-list input[type=number]", "els => els.map(e => +e.value)")
    import datetime as dt

    fields = []
    for d, s in zip(dates, spreads):
        day = dt.date.fromisoformat(d)
        fields.append([str(day - dt.timedelta(days=s)), str(day + dt.timedelta(days=s))])
    return sorted(drawn), sorted(fields)


def test_fit_stays_in_view_and_the_spread_shading_is_no_handle(tmp_path, page):
    data = tmp_path / "demo"
    data.mkdir()
    srv = Server(data, "--demo").start()
    try:
        for width, height in ((1280, 800), (1920, 1080)):
            page.set_viewport_size({"width": width, "height": height})
            page.goto(srv.url)
            wait_for_graph(page)
            wait_text(page, "#series-info", r"273 days")
            ok, detail = fit_in_view(page)
            assert ok, (width, height, detail)
            page.mouse.move(width * 0.7, height * 0.5)
            page.mouse.wheel(0, 4000)  # the page scrolled down to the lower panels: Fit is still there
            page.wait_for_function("() => window.scrollY > 0")
            ok, detail = fit_in_view(page)
            assert ok, (width, height, "scrolled", detail)
        page.set_viewport_size({"width": 1280, "height": 800})
        page.goto(srv.url)
        wait_for_graph(page)
        wait_text(page, "#series-info", r"273 days")
        page.click("#add-change-date")
        first = change_dates_text(page)
        page.wait_for_selector("#main-chart .layer-below .shapelayer path", state="attached")
        time.sleep(1.0)
        box = page.locator("#main-chart .layer-below .shapelayer path").first.bounding_box()
        # a click inside the shading, away from the line in its middle, adds a change date there
        page.mouse.click(box["x"] + box["width"] * 0.15, box["y"] + box["height"] * 0.6)
        deadline = time.time() + 20
        while len(change_dates_text(page).split()) < 2 and time.time() < deadline:
            time.sleep(0.2)
        both = change_dates_text(page).split()
        assert len(both) == 2 and first in both, both
        wait_for_graph(page)
        time.sleep(1.0)
        # a drag that starts on the shading (right of the first line) moves no shading out of step
        box = page.locator("#main-chart .layer-below .shapelayer path").last.bounding_box()
        x, y = box["x"] + box["width"] * 0.85, box["y"] + box["height"] * 0.4
        page.mouse.move(x, y)
        page.mouse.down()
        page.mouse.move(x + 70, y + 20, steps=8)
        page.mouse.up()
        time.sleep(1.5)
        drawn, fields = spreads_and_fields(page)
        assert drawn == fields, (drawn, fields)
        assert page.console_errors == []
    finally:
        srv.stop()
