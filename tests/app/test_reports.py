"""The HTML report, the CSV tables (and their CSV-injection guard) and ``bendline report``."""

from __future__ import annotations

import argparse
import copy
import csv
import io
import json
import math
import os
import re
from html.parser import HTMLParser

import pytest

from bendline.app import wording
from bendline.app.commands import report
from bendline.app.reports import NOT_CONVERGED_BOX, TABLES, csv_tables, html_report, neutralise
from bendline.inference.result import CAUTIONS

ROOT = os.path.dirname(os.path.dirname(os.path.dirname(os.path.abspath(__file__))))
SAMPLE = os.path.join(ROOT, "sample_series", "daily_admissions.csv")
SECTIONS = ("title", "status", "cautions", "headline", "summary", "main-chart", "rates-chart", "diagnostics",
            "data-quality", "spec", "generation-interval", "assumptions", "about")
#: Attributes that make a browser fetch something.
FETCHING = {"src", "href", "srcset", "poster", "data", "action", "formaction", "xlink:href", "background"}


@pytest.fixture(scope="module")
def result():
    from bendline.inference.fitting import fit_result
    from bendline.inference.reader import read_series

    res, _ = fit_result(read_series(SAMPLE), {"segments": 2, "chains": 4, "draws": 100, "seed": 3})
    return res


@pytest.fixture(scope="module")
def page(result):
    return html_report(result)


class Page(HTMLParser):
    """Every tag's attributes, the text, the style sheets and the scripts of a page."""

    def __init__(self, text):
        super().__init__(convert_charrefs=True)
        self.attrs, self.ids, self.text, self.styles, self.scripts = [], set(), [], [], []
        self._in = None
        self.feed(text)

    def handle_starttag(self, tag, attrs):
        self.attrs.append((tag, dict(attrs)))
        if dict(attrs).get("id"):
            self.ids.add(dict(attrs)["id"])
        if dict(attrs).get("style"):
            self.styles.append(dict(attrs)["style"])
        self._in = tag if tag in ("style", "script") else None

    def handle_endtag(self, tag):
        self._in = None

    def handle_data(self, data):
        if self._in == "style":
            self.styles.append(data)
        elif self._in == "script":
            self.scripts.append(data)
        else:
            self.text.append(data)

    @property
    def all_text(self):
        return re.sub(r"\s+", " ", " ".join(self.text))


def test_the_report_has_every_section_and_the_cautions(result, page):
    doc = Page(page)
    assert set(SECTIONS) <= doc.ids
    text = doc.all_text
    for caution in CAUTIONS:
        assert caution in text
    for line in result["assumptions"]:
        assert line in text
    assert wording.summary_sentence(result) in text
    for label, value, _detail in wording.headline_stats(result):
        assert label in text and value in text
    for p in result["diagnostics"]["parameters"]:
        assert p["name"] in text
    for note in result["data_quality"]["notes"]:
        assert note["message"] in text
    assert f"random seed {result['seed']}" in text
    assert "schema version" in text.lower() and result["generated_at"] in text
    assert "if the current trend continues" in text
    assert NOT_CONVERGED_BOX not in text and "not-converged" not in doc.ids


def test_plotly_is_inlined_once_and_each_chart_is_a_div(page):
    doc = Page(page)
    big = [s for s in doc.scripts if len(s) > 1_000_000]
    assert len(big) == 1  # plotly.js, once
    assert page.count("Plotly.newPlot(") == 2
    assert not any(tag == "script" and a.get("src") for tag, a in doc.attrs)


def test_the_report_requests_nothing_from_elsewhere(page):
    doc = Page(page)
    for tag, attrs in doc.attrs:
        for name, value in attrs.items():
            if name in FETCHING and value:
                assert value.startswith(("data:", "#")), (tag, name, value)
        if tag == "link":
            pytest.fail(f"the report links to {attrs}")
        if tag == "meta" and attrs.get("http-equiv", "").lower() == "refresh":
            pytest.fail("the report refreshes itself")
    for style in doc.styles:
        assert "@import" not in style
        for ref in re.findall(r"url\(\s*['\"]?([^'\")]*)", style):
            assert ref.startswith(("data:", "#")), ref
    # the figures' own scripts (not the plotly.js bundle) name no address
    for script in doc.scripts:
        if len(script) < 1_000_000:
            assert not re.search(r"(?i)\b(https?:)?//[a-z0-9.-]+\.[a-z]{2,}", script), script[:200]
    assert "Content-Security-Policy" in page and "default-src 'none'" in page


def _unconverged(result, status="unconverged"):
    bad = copy.deepcopy(result)
    bad["status"] = status
    bad["diagnostics"]["converged"] = False
    bad["diagnostics"]["rhat_max"] = 1.08
    return bad


@pytest.mark.parametrize("status", ["unconverged", "stopped", "converged"])
def test_an_unconverged_result_says_do_not_report(result, status):
    doc = Page(html_report(_unconverged(result, status)))
    assert "not-converged" in doc.ids
    text = doc.all_text
    assert NOT_CONVERGED_BOX in text
    assert "Converged (" not in text  # never presented as final
    for caution in CAUTIONS:
        assert caution in text


def test_text_from_the_data_is_escaped(result):
    hostile = copy.deepcopy(result)
    hostile["series"]["name"] = "<script>alert(1)</script>"
    hostile["data_quality"]["notes"][0]["message"] = "<img src=x onerror=alert(2)>"
    page = html_report(hostile)
    assert "<script>alert(1)" not in page and "<img src=x" not in page
    assert "&lt;script&gt;alert(1)&lt;/script&gt;" in page


def _rows(text):
    return list(csv.DictReader(io.StringIO(text)))


def test_csv_tables_parse_and_their_numbers_are_the_results(result):
    tables = csv_tables(result)
    assert set(tables) == set(TABLES)
    segs = _rows(tables["segments"])
    assert len(segs) == len(result["segments"])
    for row, seg in zip(segs, result["segments"]):
        g = seg["growth_rate_per_day"]
        assert float(row["growth_rate_per_day_median"]) == g["median"]
        assert float(row["growth_rate_per_day_q05"]) == g["q05"]
        # both numbers are stored to 6 significant digits, so they agree to about 1e-6 each
        assert float(row["growth_pct_per_day_median"]) == pytest.approx(100 * math.expm1(g["median"]), rel=1e-5)
        assert float(row["prob_growing"]) == seg["prob_growing"]
        assert row["start_date"] == seg["start_date"] and row["status"] == "reportable"
        t = seg["doubling_time_days"] or {}
        assert (row["doubling_time_days_median"] == "") == (t.get("median") is None)
    cps = _rows(tables["changepoints"])
    assert [float(r["median_day"]) for r in cps] == [c["median_day"] for c in result["changepoints"]]
    assert [r["median_date"] for r in cps] == [c["median_date"] for c in result["changepoints"]]
    band = _rows(tables["band"])
    assert len(band) == len(result["band"]["dates"])
    for i in (0, len(band) // 2, len(band) - 1):
        assert float(band[i]["trend_median_per_day"]) == result["band"]["trend_q50"][i]
        assert float(band[i]["predictive_q95_per_day"]) == result["band"]["predictive_q95"][i]
    values = result["series"]["values"]
    missing = [i for i, v in enumerate(values) if v is None]
    assert missing and all(band[i]["reported_count_per_day"] == "" for i in missing)
    assert any(r["data_quality_note"] for r in band)
    proj = _rows(tables["projection"])
    assert [float(r["counts_q95_per_day"]) for r in proj] == result["projection"]["q95"]
    assert all(r["meaning"].startswith("if the current trend continues") for r in proj)


def test_an_unconverged_result_is_marked_in_every_table(result):
    for name, text in csv_tables(_unconverged(result)).items():
        rows = _rows(text)
        assert rows and all(r["status"] == "NOT REPORTABLE: do not report" for r in rows), name


@pytest.mark.parametrize("cell, safe", [
    ("=1+1", "'=1+1"), ("+1", "'+1"), ("-2+3", "'-2+3"), ("@SUM(A1)", "'@SUM(A1)"), ("\tx", "'\tx"),
    ("\r=x", "'\r=x"), ("plain", "plain"), ("", ""), (None, ""), ("a=b", "a=b"), ("'=x", "'=x"),
    # leading whitespace does not hide a formula (a file named " =1+1.csv"), nor a separator inside
    (" =1+1", "' =1+1"), ("  @x", "'  @x"), ("\n-1+2", "'\n-1+2"), ("north;=1+1", "'north;=1+1"),
    (-0.028, -0.028), (3, 3),
])
def test_neutralise(cell, safe):
    """OWASP "CSV Injection" (https://owasp.org/www-community/attacks/CSV_Injection)."""
    assert neutralise(cell) == safe


def test_one_neutralising_rule_for_every_csv_the_product_writes():
    import inspect

    from bendline.app.commands import batch
    for cell in (" =1+1", "north;=1+1", "=x", "plain", -0.5):
        assert batch.neutralise(cell) == neutralise(cell)
    assert "FORMULA" not in inspect.getsource(batch)  # the batch summary has no rule of its own


def test_csv_injection_is_neutralised_and_numbers_stay_numbers(result):
    hostile = copy.deepcopy(result)
    hostile["series"]["name"] = '=HYPERLINK("http://example.invalid","x")'
    day = hostile["band"]["dates"][3]
    hostile["data_quality"]["notes"].append({"row": 5, "date": day, "kind": "negative",
                                              "message": "@SUM(1+1)*cmd|' /C calc'!A0"})
    hostile["segments"][-1]["growth_rate_per_day"]["median"] = -0.0421
    tables = csv_tables(hostile)
    for name, text in tables.items():
        for row in _rows(text):
            assert row["series"] == "'" + hostile["series"]["name"], name
    band = _rows(tables["band"])
    assert band[3]["data_quality_note"].startswith("'@SUM(1+1)")
    seg = _rows(tables["segments"])[-1]
    assert float(seg["growth_rate_per_day_median"]) == -0.0421  # a number, not "'-0.0421"
    assert ",-0.0421," in tables["segments"] and "'-0.0421" not in tables["segments"]
    assert float(seg["growth_pct_per_day_median"]) < 0
    # a raw spreadsheet reader sees no cell starting with a formula character
    for text in tables.values():
        for cells in csv.reader(io.StringIO(text)):
            for cell in cells:
                if cell[:1] in ("=", "+", "@", "\t", "\r"):
                    pytest.fail(f"unneutralised cell {cell!r}")
                if cell.startswith("-"):
                    float(cell)  # only numbers may start with a minus


# ------------------------------------------------------------------ the CLI

def _parser():
    parser = argparse.ArgumentParser(prog="bendline")
    report.register(parser.add_subparsers(dest="command", required=True))
    return parser


def _run(*argv):
    args = _parser().parse_args(["report", *argv])
    return report.run_report(args)


def test_report_cli_writes_the_report_and_the_tables(result, tmp_path, capsys):
    src = tmp_path / "r.json"
    src.write_text(json.dumps(result))
    out, tables = tmp_path / "out.html", tmp_path / "tables"
    assert _run(str(src), "--html", str(out), "--csv-dir", str(tables)) == 0
    assert "id=\"headline\"" in out.read_text(encoding="utf-8")
    for name in TABLES:
        assert _rows((tables / f"{name}.csv").read_text(encoding="utf-8"))
    assert capsys.readouterr().err == ""


def test_report_cli_warns_about_an_unconverged_result(result, tmp_path, capsys):
    src = tmp_path / "bad.json"
    src.write_text(json.dumps(_unconverged(result)))
    assert _run(str(src), "--html", str(tmp_path / "o.html")) == 0
    err = capsys.readouterr().err
    assert "not reportable" in err and "did not converge" in err


@pytest.mark.parametrize("content, words", [
    (None, "no such file"),
    ("this is not json", "not valid JSON"),
    ('{"series": {}}', "no schema_version"),
    ('[1, 2, 3]', "not a Bendline result"),
    ('{"schema_version": 99, "series": {"start": "2026-01-01", "values": []}, "diagnostics": {}}',
     "schema version 99"),
    ('{"schema_version": 1}', "series is missing"),
])
def test_report_cli_refuses_what_is_not_a_result(tmp_path, capsys, content, words):
    src = tmp_path / "in.json"
    if content is not None:
        src.write_text(content)
    out = tmp_path / "o.html"
    assert _run(str(src), "--html", str(out)) == 2
    err = capsys.readouterr().err
    assert err.startswith("bendline report: ") and words in err
    assert err.count("\n") == 1 and "Traceback" not in err
    assert not out.exists()


def test_report_cli_needs_an_output(tmp_path):
    with pytest.raises(SystemExit) as exc:
        _parser().parse_args(["report", str(tmp_path / "r.json")])
    assert exc.value.code == 2


def test_report_cli_says_when_it_cannot_write(result, tmp_path, capsys):
    src = tmp_path / "r.json"
    src.write_text(json.dumps(result))
    assert _run(str(src), "--html", str(tmp_path / "missing-folder" / "o.html")) == 1
    assert "cannot write the report" in capsys.readouterr().err


def test_the_report_says_when_the_step_size_was_reduced_after_divergences(result, page):
    assert "Step size reduced after divergences no" in Page(page).all_text
    shrunk = copy.deepcopy(result)
    shrunk["diagnostics"]["step_size_reductions"] = 2
    text = Page(html_report(shrunk)).all_text
    assert "Step size reduced after divergences 2 times; the draws before the last reduction were discarded" in text
