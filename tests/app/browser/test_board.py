"""The weekly board in Chromium, as an analyst uses it.

Load a long-format file, Fit all, watch the rows fill in, sort, open one
series in the dashboard and refit it, load next week's release, read what
changed, open the board's briefing view and its report offline; axe-core
(WCAG 2.0/2.1 A and AA) on each page. Fits are small (2 chains, at most 20
draws each): a bounded amount of work, so the test holds at any machine speed.
"""

from __future__ import annotations

import re
import urllib.request

from .conftest import ROOT, wait_for_graph
from .test_accessibility import assert_no_violations, wait_finished

REGIONS = f"{ROOT}/sample_series/regions_long.csv"
SMALL = (("chains", "2"), ("draws", "20"), ("max-draws", "20"))
FIT_TIMEOUT_MS = 240_000


def _releases(tmp_path):
    lines = open(REGIONS, encoding="utf-8").read().splitlines()
    last = sorted({line.split(",")[0] for line in lines[1:]})[-14:]
    first = tmp_path / "regions_week_1.csv"
    first.write_text("\n".join([lines[0]] + [x for x in lines[1:] if x.split(",")[0] not in last]) + "\n")
    return first, REGIONS


def _wait_all_finished(page):
    page.wait_for_function("() => /all series finished/.test(document.querySelector('#board-status').innerText)",
                           timeout=FIT_TIMEOUT_MS)


def _row_names(page, table=0):
    return page.eval_on_selector_all(
        ".board-table", f"ts => ts[{table}] ? [...ts[{table}].querySelectorAll('tbody th > span:first-child')]"
                        ".map(e => e.textContent) : []")


def test_a_board_from_upload_to_next_weeks_release(server, page, tmp_path):
    first, second = _releases(tmp_path)
    page.goto(server.url + "/")
    page.click("text=Boards: many series at once")
    page.wait_for_selector("#board-fit-all")
    page.set_input_files("#board-upload input[type=file]", str(first))
    page.wait_for_function("() => /regions_week_1/.test(document.querySelector('#board-upload-name').innerText)")
    page.fill("#segments", "1")
    page.click(".board-options details > summary")
    for name, value in SMALL:
        page.fill(f"#{name}", value)
    assert_no_violations(page, "the new-board page")
    page.click("#board-fit-all")
    page.wait_for_url(re.compile(r"/board/[0-9a-f]{16}$"), timeout=60000)
    board_id = page.url.rsplit("/", 1)[1]
    _wait_all_finished(page)
    names = sorted(_row_names(page, 0) + _row_names(page, 1))
    assert names == ["Harrowmere", "Orlund", "Quillby", "Tamsey"]
    assert page.eval_on_selector_all(".board-chart img", "es => es.every(e => e.alt.length > 20)")
    assert_no_violations(page, "the board")

    # sort by name: the reportable table (if any) is in name order
    page.click("#board-sort input[value=name]")
    page.wait_for_timeout(500)
    shown = _row_names(page, 0)
    assert shown == sorted(shown)

    # open Orlund in the dashboard, refit it with two segments; the board shows the new run
    old_run = page.get_attribute("tr:has(th:has-text('Orlund')) a", "href").split("run=")[1]
    page.click("tr:has(th:has-text('Orlund')) a")
    wait_for_graph(page)
    page.wait_for_function(f"() => new URLSearchParams(location.search).get('run') === '{old_run}'")
    wait_finished(page)  # the board's run is loaded into the page (its status, exports), controls restored
    page.fill("#segments", "2")
    page.press("#segments", "Enter")
    page.click("#fit-button")
    # the new run's id in the address (the old run, already finished, was shown until then)
    page.wait_for_function(f"() => /run=[0-9a-f]{{16}}/.test(location.search) && !location.search.includes('{old_run}')",
                           timeout=60000)
    new_run = re.search(r"run=([0-9a-f]{16})", page.url).group(1)
    assert new_run != old_run
    wait_finished(page)
    page.goto(f"{server.url}/board/{board_id}")
    page.wait_for_selector(f"a[href='/?run={new_run}']", timeout=30000)

    # next week's release: every series fitted again, and what changed is said per series
    page.set_input_files("#board-release-upload input[type=file]", str(second))
    page.click("#board-release")
    page.wait_for_function("() => /Release 2 of 2/.test(document.querySelector('#board-status').innerText)",
                           timeout=60000)
    _wait_all_finished(page)
    since = page.eval_on_selector_all("tbody tr td:nth-child(7)", "tds => tds.map(t => t.textContent)")
    assert len(since) == 4 and all(re.search(r"(still|was) \w+", s) for s in since), since
    assert_no_violations(page, "the board after a second release")

    # the briefing view and the report, read offline
    page.goto(f"{server.url}/brief/board/{board_id}")
    assert page.inner_text("h1").startswith("Board:")
    assert_no_violations(page, "the board's briefing view")
    report = tmp_path / "board.html"
    report.write_bytes(urllib.request.urlopen(f"{server.url}/board/{board_id}/report.html", timeout=60).read())
    page.route("**/*", lambda route: route.abort() if not route.request.url.startswith("file:") else
               route.continue_())
    page.goto(report.as_uri())
    assert page.eval_on_selector_all("svg[role=img]", "es => es.length") == 4
    assert_no_violations(page, "the board's report")
    assert all("404" in e or "ERR_FAILED" in e for e in page.console_errors), page.console_errors
