"""WCAG 2.1 A and AA in Chromium: axe-core on every page, and the dashboard from the keyboard alone.

axe-core runs through ``axe_playwright_python`` (the maintained Playwright
integration on PyPI, which bundles axe-core), restricted to the rules tagged
for WCAG 2.0 and 2.1 levels A and AA (tags ``wcag2a``, ``wcag2aa``,
``wcag21a``, ``wcag21aa``; Deque, "axe-core rule descriptions",
https://github.com/dequelabs/axe-core/blob/develop/doc/rule-descriptions.md).
A test fails listing each violated rule and its elements.

The keyboard test follows WCAG 2.1.1 (Keyboard) and 2.1.2 (No Keyboard
Trap), https://www.w3.org/TR/WCAG21/#keyboard-accessible: Tab from the top
of the page must reach the Fit button without visiting any control twice,
and the fit is set up, started and watched to its end without the mouse.

Fits are kept small (2 chains, at most 20 draws each): they end after a
bounded amount of work on any machine, unconverged and so "Not reportable",
which is the verdict the live region must then announce.
"""

from __future__ import annotations

import json
import re
import time
import urllib.request

import pytest
from axe_playwright_python.sync_playwright import Axe

from bendline.app import wording

from .conftest import Server, wait_for_graph

pytestmark = [pytest.mark.browser, pytest.mark.slow]
WCAG_TAGS = ["wcag2a", "wcag2aa", "wcag21a", "wcag21aa"]
#: A small fit: a bounded amount of work whatever the machine's speed.
SMALL_FIT = (("chains", "2"), ("draws", "20"), ("max-draws", "20"))
FINISHED = r"^(Converged|Not converged|Stopped|Failed)"
#: Generous: a loaded 2-core machine; the fit itself is a few thousand iterations.
RUN_TIMEOUT_MS = 240_000


def axe_violations(page):
    """axe-core's WCAG 2.0/2.1 A and AA violations on the page: [(rule id, impact, [element selectors])]."""
    results = Axe().run(page, options={"runOnly": {"type": "tag", "values": WCAG_TAGS}})
    return [(v["id"], v["impact"], [" ".join(n["target"]) if isinstance(n["target"], list) else str(n["target"])
                                    for n in v["nodes"]]) for v in results.response["violations"]]


def assert_no_violations(page, where):
    found = axe_violations(page)
    listing = "\n".join(f"  {rule} ({impact}): {', '.join(nodes)}" for rule, impact, nodes in found)
    assert not found, f"axe-core found WCAG 2.1 A/AA violations on {where}:\n{listing}"


def wait_series(page):
    page.wait_for_function("() => /273 days/.test(document.querySelector('#series-info').innerText)",
                           timeout=60000)


def wait_finished(page):
    page.wait_for_function(f"() => /{FINISHED}/.test(document.querySelector('#progress').innerText)",
                           timeout=RUN_TIMEOUT_MS)
    # the poll that saw the run finish stops the timer and disables Stop; the export links follow
    page.wait_for_function("() => document.querySelector('#stop-button').disabled && "
                           "!document.querySelector('#export-report').classList.contains('disabled')",
                           timeout=60000)


def small_fit_by_mouse(page):
    """Fit the demo series with SMALL_FIT (pointer clicks; the keyboard test does it by keys)."""
    if not page.evaluate("document.querySelector('#advanced-sampler').open"):
        page.click("#advanced-sampler > summary")
    for name, value in SMALL_FIT:
        page.fill(f"#{name}", value)
        page.press(f"#{name}", "Enter")
    page.click("#fit-button")
    wait_finished(page)
    return re.search(r"run=([0-9a-f]{16})", page.url).group(1)


@pytest.fixture
def demo(tmp_path):
    data = tmp_path / "data"
    data.mkdir()
    srv = Server(data, "--demo").start()
    yield srv
    srv.stop()


def test_dashboard_meets_wcag_before_and_after_a_fit(demo, page):
    page.goto(demo.url)
    wait_for_graph(page)
    wait_series(page)
    assert_no_violations(page, "the dashboard with a series loaded")
    assert page.evaluate("document.documentElement.lang") == "en"
    page.click("#add-change-date")  # the change-date row's fields and button are checked too
    page.wait_for_selector("#change-date-list .change-date input")
    small_fit_by_mouse(page)
    # the live region announces the verdict, in the one wording every view uses
    announced = page.inner_text("#status-announcer")
    assert announced.startswith((wording.REPORTABLE, wording.NOT_REPORTABLE)), announced
    live = page.eval_on_selector("#status-announcer", "e => [e.getAttribute('role'), e.getAttribute('aria-live')]")
    assert live == ["status", "polite"]
    # every chart has its text alternative, carrying the summary sentence the page shows
    for graph in ("main-chart", "change-date-chart", "rates-chart", "trace-chart", "weekday-chart",
                  "residual-chart"):
        words = page.eval_on_selector(f"#{graph}-words", "e => e.textContent")
        assert words.strip(), graph
    summary = page.inner_text("#summary-sentence").split(": ", 1)[-1]
    assert summary and summary in page.eval_on_selector("#main-chart-words", "e => e.textContent")
    assert_no_violations(page, "the dashboard after a fit")
    assert page.console_errors == []


@pytest.fixture
def finished_run(demo, browser):
    """(server, run id) of a small finished fit of the demo series."""
    context = browser.new_context(viewport={"width": 1280, "height": 900})
    pg = context.new_page()
    pg.set_default_timeout(60000)
    pg.goto(demo.url)
    wait_for_graph(pg)
    wait_series(pg)
    run_id = small_fit_by_mouse(pg)
    context.close()
    return demo, run_id


def test_briefing_view_meets_wcag(finished_run, page):
    server, run_id = finished_run
    page.set_viewport_size({"width": 1600, "height": 900})
    page.goto(f"{server.url}/brief/{run_id}")
    wait_for_graph(page, "#brief-main-chart")
    page.wait_for_function("() => document.querySelector('#brief-headline').children.length > 0")
    assert_no_violations(page, "the briefing view")
    assert page.evaluate("document.documentElement.lang") == "en"
    # the main chart's text alternative, with the summary sentence shown above it
    page.wait_for_function("() => (document.querySelector('#brief-main-words') || {}).textContent")
    summary = page.inner_text("#brief-summary").split(": ", 1)[-1]
    assert summary in page.eval_on_selector("#brief-main-words", "e => e.textContent")
    assert page.console_errors == []


def test_html_report_meets_wcag(finished_run, page, tmp_path):
    server, run_id = finished_run
    body = urllib.request.urlopen(f"{server.url}/download/{run_id}/report.html", timeout=60).read()
    result = json.loads(urllib.request.urlopen(f"{server.url}/download/{run_id}/result.json", timeout=60).read())
    report = tmp_path / "report.html"
    report.write_bytes(body)
    page.goto(report.as_uri())
    page.wait_for_selector("#report-main .main-svg", timeout=60000)
    assert_no_violations(page, "the HTML report")
    assert page.evaluate("document.documentElement.lang") == "en"
    # each chart is a figure whose caption says in words what it shows: every change date, every segment
    captions = page.eval_on_selector_all("figure figcaption", "els => els.map(e => e.textContent)")
    assert len(captions) == 2, captions
    main, rates = captions
    for cp in result["changepoints"]:
        assert wording.change_date_text(cp) in main, (cp, main)
    for seg in result["segments"]:
        assert f"Segment {seg['index']}:" in rates
    assert page.console_errors == []


def _focused(page):
    """(identity, description) of the focused element; the identity is a mark the test puts on it."""
    return tuple(page.evaluate("""() => {
        const e = document.activeElement;
        if (!e || e === document.body) { return ['body', 'body']; }
        if (!e.dataset.tabStop) { window.__tabStops = (window.__tabStops || 0) + 1; e.dataset.tabStop = window.__tabStops; }
        const name = e.getAttribute('aria-label') || (e.labels && e.labels[0] && e.labels[0].innerText)
            || (e.innerText || e.value || '').trim();
        return [e.dataset.tabStop, e.tagName.toLowerCase() + '#' + (e.id || '') + ' ' + name.slice(0, 40)];
    }"""))


def test_keyboard_alone_tabs_to_fit_and_runs_a_fit(demo, page):
    page.goto(demo.url)
    wait_for_graph(page)
    wait_series(page)
    page.evaluate("document.activeElement && document.activeElement.blur()")
    seen, marks, typed = [], [], set()
    values = dict(SMALL_FIT)
    for _press in range(120):  # far more than the page's Tab stops before Fit (about 30)
        page.keyboard.press("Tab")
        mark, here = _focused(page)
        assert mark != "body", f"Tab left the page after {seen[-3:]}"
        # a trap shows as a pair of elements taking turns, or any control coming round again
        assert mark not in marks, f"Tab came back to {here!r}; the stops so far: {seen}"
        marks.append(mark)
        seen.append(here)
        if here.startswith("summary#") and "sampler settings" in here:
            page.keyboard.press("Enter")  # open the sampler's fold
            page.wait_for_function("() => document.querySelector('#advanced-sampler').open")
        control = here.split("#", 1)[1].split(" ", 1)[0]
        if control in values and control not in typed:
            page.keyboard.press("Control+A")
            page.keyboard.type(values[control])
            typed.add(control)
        if control == "fit-button":
            break
    else:
        raise AssertionError(f"Tab never reached Fit; the stops were: {seen}")
    assert typed == set(values), typed
    assert "Alt+Shift+F" in page.get_attribute("#fit-button", "title")
    assert "Alt+Shift+S" in page.get_attribute("#stop-button", "title")
    page.keyboard.press("Enter")
    wait_finished(page)
    assert re.search(r"run=[0-9a-f]{16}", page.url)
    # the fit used the settings typed in: 2 chains, 20 draws each
    assert re.search(r"20 draws per chain × 2 chains", page.inner_text("#progress")), page.inner_text("#progress")
    announced = page.inner_text("#status-announcer")
    assert announced.startswith((wording.REPORTABLE, wording.NOT_REPORTABLE)), announced
    assert page.console_errors == []
