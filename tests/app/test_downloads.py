"""Download routes, the briefing view's page and content, and the Export links (no browser)."""

from __future__ import annotations

import csv
import io
import json
import os

import pytest
from dash._callback_context import context_value
from dash._utils import AttributeDict

from bendline.app.executors import InlineExecutor
from bendline.app.reports import TABLES
from bendline.app.runs import RunService
from bendline.app.store.disk import DiskRunStore
from bendline.app.web import brief, create_app
from bendline.app.web.callbacks import exports
from bendline.app.web.context import AppServices
from bendline.app.web.downloads import EXPORTS, export_links, file_name, safe_name
from bendline.inference.reader import read_series
from bendline.inference.result import CAUTIONS

ROOT = os.path.dirname(os.path.dirname(os.path.dirname(os.path.abspath(__file__))))
SAMPLE = os.path.join(ROOT, "sample_series", "daily_admissions.csv")
DATA = os.path.join(ROOT, "tests", "app", "data")
OPTIONS = {"segments": 2, "chains": 4, "draws": 100, "seed": 3}


class Shelf:
    """An executor that keeps runs queued (never fits them)."""

    def submit(self, run_id):
        return None


@pytest.fixture(scope="module")
def site(tmp_path_factory):
    store = DiskRunStore(str(tmp_path_factory.mktemp("store")))
    runs = RunService(store, InlineExecutor(store))
    app = create_app(AppServices(runs=runs, store=store))
    series = read_series(SAMPLE)
    done = runs.submit(series, OPTIONS)["id"]  # fitted inline
    waiting = RunService(store, Shelf()).submit(series, OPTIONS)["id"]
    return app, runs, done, waiting


def trigger(prop_id):
    context_value.set(AttributeDict(triggered_inputs=[{"prop_id": prop_id, "value": None}]))


def test_every_export_downloads_as_an_attachment(site):
    app, runs, done, _ = site
    client = app.server.test_client()
    result = runs.result(done)
    assert result is not None
    for _key, _label, file in EXPORTS:
        resp = client.get(f"/download/{done}/{file}")
        assert resp.status_code == 200, file
        disp = resp.headers["Content-Disposition"]
        assert disp.startswith("attachment;") and f"daily_admissions-{done}-{file}" in disp
        assert resp.headers["X-Content-Type-Options"] == "nosniff"
        text = resp.get_data(as_text=True)
        if file == "result.json":
            assert json.loads(text) == result
        elif file == "report.html":
            assert resp.mimetype == "text/html" and "id=\"headline\"" in text and done in text
        else:
            rows = list(csv.DictReader(io.StringIO(text)))
            assert rows and resp.mimetype == "text/csv"


@pytest.mark.parametrize("path", [
    "/download/not-a-run/report.html", "/download/0123456789abcdef/report.html", "/download/{done}/secrets.txt",
    "/download/{done}/../report.html", "/download/{done}/band.csv/extra", "/download/", "/download/{done}",
])
def test_bad_downloads_are_404_pages(site, path):
    app, _runs, done, _ = site
    resp = app.server.test_client().get(path.format(done=done))
    assert resp.status_code == 404
    text = resp.get_data(as_text=True)
    assert "Traceback" not in text and ("No such run" in text or "Not found" in text)


def test_a_run_without_a_result_is_409(site):
    app, _runs, _done, waiting = site
    resp = app.server.test_client().get(f"/download/{waiting}/report.html")
    assert resp.status_code == 409
    assert "still running" in resp.get_data(as_text=True)


def test_file_names_are_sanitised():
    assert safe_name("daily_admissions.csv") == "daily_admissions"
    assert safe_name("../../etc/passwd") == "etc_passwd"
    assert safe_name('=cmd|"x"; rm -rf /') == "cmd_x_rm_-rf"
    assert safe_name("") == "series" and safe_name("...") == "series"
    assert file_name("Région Nord", "0123456789abcdef", "band.csv") == \
        "bendline-R_gion_Nord-0123456789abcdef-band.csv"


def test_brief_page_is_404_for_bad_ids_and_the_view_for_a_run(site):
    app, _runs, done, _ = site
    client = app.server.test_client()
    for path in ("/brief/zzz", "/brief/0123456789abcdef", "/brief/ABCDEF0123456789"):
        resp = client.get(path)
        assert resp.status_code == 404 and "No such run" in resp.get_data(as_text=True)
    resp = client.get(f"/brief/{done}")
    assert resp.status_code == 200 and "_dash-config" in resp.get_data(as_text=True)
    assert client.get("/brief/_dash-layout").status_code == 200


def test_brief_content_of_a_finished_run_is_the_result(site):
    app, runs, done, _ = site
    with app.server.test_request_context("/"):
        trigger(f"{brief.URL}.pathname")
        out = dict(zip(brief.OUTPUTS, brief.update(f"/brief/{done}", None, {"w": 1920, "h": 1080}, None)))
    result = runs.result(done)
    converged = result["diagnostics"]["reportable"]
    assert out[(brief.BADGE, "children")] == ("Reportable" if converged else "Not reportable: do not report these numbers")
    assert out[(brief.POLL, "disabled")] is True
    assert "data through 4 Oct 2026" in out[(brief.TITLE, "children")]
    text = str(out[(brief.HEADLINE, "children")])
    from bendline.app import wording

    for _label, value, _detail in wording.headline_stats(result):
        assert value.split(" per ")[0] in text
    assert out[(brief.SUMMARY, "children")].endswith(wording.summary_sentence(result))
    footer = str(out[(brief.FOOTER, "children")])
    assert all(c in footer for c in CAUTIONS) and done in footer
    assert all(line in footer for line in result["assumptions"])
    with app.server.test_request_context("/"):
        trigger(f"{brief.POLL}.n_intervals")
        again = brief.update(f"/brief/{done}", 3, {"w": 1920, "h": 1080}, out[(brief.DRAWN, "data")])
    assert all(v is brief.no_update for v in again)  # nothing new: nothing sent


def test_brief_content_while_sampling_is_provisional():
    from bendline.inference.series import Series

    snap = json.load(open(os.path.join(DATA, "snapshot_04_sampling.json")))
    series = Series.from_dict(json.load(open(os.path.join(DATA, "series.json"))))
    rec = {"id": "0123456789abcdef", "status": "running", "series_name": "test", "options": OPTIONS, "seed": 3}
    out = brief.content(rec, snap, series)
    assert out[(brief.BADGE, "children")] == "Provisional: still sampling"
    assert out[(brief.POLL, "disabled")] is False
    assert out[(brief.STATUS, "children")].startswith("Provisional")
    assert out[(brief.SUMMARY, "children")].startswith("Provisional, still sampling: ")
    footer = str(out[(brief.FOOTER, "children")])
    assert "observation model" in footer and all(c in footer for c in CAUTIONS)
    note = out[(brief.MAIN, "figure")].layout.annotations[0]
    assert note.visible and note.text.startswith("Provisional")


def test_brief_of_an_unknown_run_says_so(site):
    app, *_ = site
    with app.server.test_request_context("/"):
        trigger(f"{brief.URL}.pathname")
        out = dict(zip(brief.OUTPUTS, brief.update("/brief/0123456789abcdef", None, None, None)))
    assert out[(brief.TITLE, "children")] == "No such run" and out[(brief.POLL, "disabled")] is True


def test_export_links_follow_the_run(site):
    app, _runs, done, waiting = site
    with app.server.test_request_context("/"):
        ready = exports.links(done, True)
        queued = exports.links(waiting, False)
        none = exports.links(None, True)
    hrefs = ready[0:-1:2]
    assert hrefs == [f"/download/{done}/{f}" for _k, _l, f in EXPORTS]
    assert all("disabled" not in c for c in ready[1:-1:2])
    assert all(h == "#" for h in queued[0:-1:2]) and all("disabled" in c for c in queued[1:-1:2])
    assert "once the run finishes" in queued[-1] and "once a fit has finished" in none[-1]
    assert export_links(done, {"status": "failed", "converged": False}, False)[2].startswith("This run kept no")
    assert len(TABLES) == 4
