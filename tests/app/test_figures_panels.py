"""Figure builders of the dashboard (app/web/figures/): the panels beside the main chart.

Growth rates, change dates, traces, diagnostics, weekday effect, residuals and
the empty figure, then the fields of the current engine's snapshots. The
example data are described in figure_helpers.py; the main chart is tested in
test_figures_main.py.
"""

from __future__ import annotations

import json
import math
import re

import pytest

from bendline.app.web import figures as F
from bendline.app.web import theme

from .figure_helpers import (
    TENTATIVE,
    _as_json,
    _rates_snapshot,
    _segment,
    _series_for,
    _unconverged,
)


def _plain(text):
    """An annotation's text with its line breaks (empty panels wrap long messages) as spaces."""
    return (text or "").replace("<br>", " ")


# ----------------------------------------------------------------- rates

def test_rates_texts_growing_shrinking_straddling():
    snap = _rates_snapshot()
    grow, shrink, straddle = (F.growth_text(s) for s in snap["segments"])
    # the same words as the headline and the summary sentence (inference.wording.time_text)
    assert grow[0].startswith("doubling every 12 days (") and grow[1] == "P(growing) > 99% · R 1.31 (1.22–1.41)"
    assert shrink[0].startswith("halving every 25 days (") and shrink[1] == "P(growing) < 1%"
    assert straddle[0].endswith("(at least 26, or no doubling)") and straddle[1] == "P(growing) 74%"
    halving_unbounded = {"halving_time_days": {"median": 140.0, "q05": 40.0, "q95": None}, "prob_growing": 0.2}
    assert F.growth_text(halving_unbounded)[0] == "halving every 140 days (at least 40, or no halving)"
    assert F.growth_text({"prob_growing": 0.5})[0] == "no clear doubling or halving"
    assert F.growth_text({"doubling_time_days": {"median": 6.25, "q05": 5.5, "q95": 7.1}})[0] == \
        "doubling every 6.2 days (5.5 to 7.1)"


def _named(fig, name):
    found = [a for a in fig.layout.annotations if a.name == name]
    assert len(found) == 1, name
    return found[0]


def test_rates_figure_rows(snaps):
    snap = _rates_snapshot()
    fig = F.rates_figure(snap, highlight_segment=2)
    bars, medians = fig.data
    assert [c[0] for c in bars.customdata] == [1, 2, 3]
    assert [c[0] for c in medians.customdata] == [1, 2, 3]
    labels = [_named(fig, f"segment {k}").text for k in (1, 2, 3)]
    assert labels[0].endswith("<b>Segment 1: 5 Jan – 14 Mar</b>")
    assert labels[1].endswith("<b>Segment 2: 14 Mar – 2 May</b>")
    assert labels[2].endswith("<b>Segment 3: 2 May – 29 Jun</b>")  # old engine: end_date is the day after the data
    # each row's symbol, in its colour, starts the label
    assert labels[0].startswith(f"<span style='color:{theme.GROWING}'>▲</span>")
    assert labels[1].startswith(f"<span style='color:{theme.SHRINKING}'>▼</span>")
    assert labels[2].startswith(f"<span style='color:{theme.UNCLEAR}'>●</span>")
    assert fig.layout.yaxis.range[0] > fig.layout.yaxis.range[1]  # segment 1 at the top
    # rows from the top, each label above its interval bar
    assert list(bars.y) == sorted(bars.y) and list(medians.y) == list(bars.y)
    for k, y in enumerate(bars.y):
        assert k - 0.5 < y < k + 0.5
        assert _named(fig, f"segment {k + 1}").y == k - 0.5
    # growth rates shown as % change per day, 100 (exp(r) - 1)
    assert medians.x[0] == pytest.approx(100 * (math.exp(math.log(2) / 12) - 1))
    assert bars.base[2] == pytest.approx(100 * (math.exp(-0.01) - 1))
    assert bars.x[2] == pytest.approx(100 * (math.exp(0.027) - math.exp(-0.01)))
    assert "% change per day" in fig.layout.xaxis.title.text
    # symbols: above zero, below zero, straddling
    assert list(medians.marker.symbol) == ["triangle-up", "triangle-down", "circle"]
    assert _named(fig, "segment 1 detail").text == "doubling every 12 days (9.0 to 17)<br>P(growing) > 99% · R 1.31 (1.22–1.41)"
    assert _named(fig, "segment 2 detail").text == "<b>halving every 25 days (20 to 31)</b><br>P(growing) < 1%"
    assert any(s.type == "line" and s.x0 == 0 and s.x1 == 0 for s in fig.layout.shapes)  # zero line
    highlighted = [s for s in fig.layout.shapes if s.name == "highlighted segment"]
    assert len(highlighted) == 1 and (highlighted[0].y0, highlighted[0].y1) == (0.5, 1.5)  # row 2
    assert not any(s.name == "highlighted segment" for s in F.rates_figure(snap).layout.shapes)
    weekly = F.rates_figure(snaps["snapshot_weekly_done"])
    assert _named(weekly, "segment 3").text.endswith("<b>Segment 3: 10 Dec 2024 – 20 Jun 2025</b>")


def test_rates_last_segment_ends_on_the_last_day_of_data(snaps):
    """Old engines gave the last segment the day after the data as end_date, the current one the last day."""
    old, new = snaps["snapshot_06_done"], snaps["snapshot_v2_done"]
    assert old["segments"][-1]["end_date"] == "2026-10-05" and new["segments"][-1]["end_date"] == "2026-10-04"
    for snap in (old, new):
        fig = F.rates_figure(snap)
        assert _named(fig, "segment 3").text.endswith("<b>Segment 3: 22 Jun – 4 Oct</b>")
        assert _named(fig, "segment 1").text.endswith("<b>Segment 1: 5 Jan – 19 Mar</b>")
    weekly = F.rates_figure(snaps["snapshot_v2_weekly_done"])  # last week starts 22 Dec 2025
    assert _named(weekly, "segment 4").text.endswith("<b>Segment 4: 20 Jun 2025 – 28 Dec 2025</b>")
    # without day offsets, series_end (the last value's date) bounds the last segment
    seg = {"index": 2, "start_date": "2026-05-02", "end_date": "2026-06-30"}
    assert F.segment_label(seg, last=True, series_end="2026-06-29") == "Segment 2: 2 May – 29 Jun"
    assert F.segment_label(seg, last=True, series_end="2026-06-22", interval_days=7) == "Segment 2: 2 May – 28 Jun"
    assert F.segment_label(seg, last=True) == "Segment 2: 2 May – 29 Jun"
    assert F.segment_label(seg) == "Segment 2: 2 May – 30 Jun"


def _text_lines(fig):
    lines = []
    for a in fig.layout.annotations:
        text = re.sub(r"<[^>]+>", "", (a.text or "").replace("<br>", "\n"))
        lines += [(a.name, line) for line in text.split("\n")]
    return lines


@pytest.mark.parametrize("name", ["snapshot_06_done", "snapshot_weekly_done", "snapshot_v2_sampling"])
def test_rates_text_is_short_enough_for_a_narrow_column(name, snaps):
    """Every line of text sits over the plot (nothing beside it) and stays short (a 360 px column)."""
    fig = F.rates_figure(snaps[name], highlight_segment=1)
    for a in fig.layout.annotations:
        assert a.xref == "paper" and a.x == 0 and a.xanchor == "left"
    for _, line in _text_lines(fig):
        assert len(line) <= 56, line
    # the longest texts: dates with years, an unbounded interval, R
    longest = _segment(12, "2024-12-10", "2025-06-20", (-0.01, 0.008, 0.027),
                       doubling={"median": 86.6, "q05": 25.7, "q95": None}, prob=0.74,
                       rep={"median": 1.06, "q05": 0.98, "q95": 1.15})
    fig = F.rates_figure({"phase": "sampling", "segments": [longest]})
    for _, line in _text_lines(fig):
        assert len(line) <= 56, line
    assert "doubling every 87 days (at least 26, or no doubling)" in _named(fig, "segment 12 detail").text


# ------------------------------------------------------------- change dates

def test_changepoint_figure(snaps, daily, weekly):
    snap = snaps["snapshot_06_done"]
    fig = F.changepoint_figure(daily, snap, highlight_segment=2)
    k = len(snap["changepoints"])
    assert len(fig.data) == 2 * k
    assert [t.name for t in fig.data[:k]] == [f"change date {j + 1}" for j in range(k)]
    assert fig.layout.xaxis.type == "date"
    assert fig.layout.yaxis.title.text == "Share of draws per day"
    colours = {t.marker.color for t in fig.data[:k]}
    assert len(colours) == k
    assert sum(fig.data[0].y) == pytest.approx(1.0, abs=1e-3)
    assert list(fig.data[k].x) == [F.day_to_x(daily, snap["changepoints"][0]["median_day"])] * 2
    wk = F.changepoint_figure(weekly, snaps["snapshot_weekly_done"])
    assert wk.layout.yaxis.title.text == "Share of draws per week"
    assert len(F.changepoint_figure(daily, snaps["snapshot_00_init"]).data) == 0
    one_segment = dict(snap, changepoints=[], changepoint_histograms={"edges_day": [0, 1], "counts": []})
    assert "no change dates" in _plain(F.changepoint_figure(daily, one_segment).layout.annotations[0].text)


def test_changepoint_updates(snaps, daily):
    a, b = snaps["snapshot_04_sampling"], snaps["snapshot_06_done"]
    before = _as_json(F.changepoint_figure(daily, a))
    after = _as_json(F.changepoint_figure(daily, b))
    assert _as_json(F.apply_updates(before, F.changepoint_updates(daily, b))) == after
    assert F.changepoint_updates(daily, snaps["snapshot_00_init"])["trace_count"] == 0


# ------------------------------------------------------------------ traces

def test_trace_figure(snaps):
    snap = snaps["snapshot_06_done"]
    fig = F.trace_figure(snap, "change date 1 (day)")
    chains = len(snap["traces"]["values"][0])
    assert len(fig.data) == chains == 8
    assert list(fig.data[0].x) == snap["traces"]["iteration"]
    assert list(fig.data[3].y) == snap["traces"]["values"][0][3]
    assert [t.name for t in fig.data] == [f"chain {c + 1}" for c in range(8)]
    # chains 1..7 in seven colours, chain 8 repeats chain 1's colour with a dash
    assert len({t.line.color for t in fig.data[:7]}) == 7
    assert fig.data[7].line.color == fig.data[0].line.color and fig.data[7].line.dash != fig.data[0].line.dash
    assert fig.layout.title.text == "change date 1 (day)"
    assert fig.layout.annotations[1].text == "R-hat 1.003 · bulk ESS 2,194 · tail ESS 1,577"
    assert fig.layout.showlegend is False
    assert fig.layout.annotations[0].text.startswith("8 chains, one line style each")
    warm = F.trace_figure(snaps["snapshot_02_warmup"], "change date 1 (day)")
    assert len(warm.data) == 0 and "warm-up" in _plain(warm.layout.annotations[0].text)
    before = _as_json(F.trace_figure(snaps["snapshot_04_sampling"], "log level 0"))
    after = _as_json(F.trace_figure(snap, "log level 0"))
    assert _as_json(F.apply_updates(before, F.trace_updates(snap, "log level 0"))) == after


def test_sixteen_chains_cycle_colours_with_dashes():
    values = [[[float(c)] * 3 for c in range(16)]]
    snap = {"phase": "sampling", "traces": {"iteration": [0, 1, 2], "names": ["q"], "values": values}}
    fig = F.trace_figure(snap, "q")
    n = len(theme.CHAIN_COLOURS)
    assert len(fig.data) == 16
    styles = {(t.line.color, t.line.dash) for t in fig.data}
    assert len(styles) == 16
    assert fig.data[n].line.color == fig.data[0].line.color


# ------------------------------------------------------------- diagnostics

def test_diagnostics_rows_flags(snaps):
    rows = F.diagnostics_rows(snaps["snapshot_06_done"])
    assert rows and all(r["status"] == "ok" for r in rows)
    assert set(rows[0]) == {"parameter", "rhat", "ess_bulk", "ess_tail", "status"}
    snap = {"diagnostics": {"criterion": "max R-hat < 1.01 and min bulk and tail ESS >= 400", "parameters": [
        {"name": "a", "rhat": 1.002, "ess_bulk": 900.4, "ess_tail": 800.0},
        {"name": "b", "rhat": 1.01, "ess_bulk": 900.0, "ess_tail": 800.0},
        {"name": "c", "rhat": 1.003, "ess_bulk": 399.0, "ess_tail": 800.0},
        {"name": "d", "rhat": 1.003, "ess_bulk": 900.0, "ess_tail": 120.0},
        {"name": "e", "rhat": 1.2, "ess_bulk": 50.0, "ess_tail": 40.0},
        {"name": "f", "rhat": None, "ess_bulk": None, "ess_tail": None},
    ]}}
    by_name = {r["parameter"]: r for r in F.diagnostics_rows(snap)}
    assert by_name["a"] == {"parameter": "a", "rhat": 1.002, "ess_bulk": 900, "ess_tail": 800, "status": "ok"}
    assert by_name["b"]["status"] == "chains disagree (R-hat ≥ 1.01)"
    assert by_name["c"]["status"] == "too few effective draws (ESS < 400)"
    assert by_name["d"]["status"] == "too few effective draws (ESS < 400)"
    assert by_name["e"]["status"] == "chains disagree (R-hat ≥ 1.01); too few effective draws (ESS < 400)"
    assert by_name["f"]["status"] == "not available"
    assert F.diagnostics_rows(snaps["snapshot_02_warmup"]) == []
    flagged = F.diagnostics_rows(snaps["snapshot_04_sampling"])
    assert any(r["status"] != "ok" for r in flagged)


def test_diagnostics_summary(snaps):
    done = F.diagnostics_summary(snaps["snapshot_06_done"])
    assert done.startswith("Converged: max R-hat 1.007, min ESS 1,410 (criterion: max R-hat < 1.01")
    sampling = F.diagnostics_summary(snaps["snapshot_04_sampling"])
    assert sampling.startswith("Not yet converged: max R-hat 1.061") and "still sampling" in sampling
    assert F.diagnostics_summary(snaps["snapshot_02_warmup"]).startswith("Not yet converged: warm-up")
    assert F.diagnostics_summary(snaps["snapshot_00_init"]).startswith("Not yet converged")
    bad = F.diagnostics_summary(_unconverged(snaps["snapshot_06_done"]))
    assert bad.startswith("Not converged:") and bad.endswith("Do not report.")


# ----------------------------------------------------------------- weekday

def test_weekday_figure(snaps):
    snap = snaps["snapshot_06_done"]
    fig = F.weekday_figure(snap)
    assert len(fig.data) == 1
    t = fig.data[0]
    assert list(t.x) == ["Mon", "Tue", "Wed", "Thu", "Fri", "Sat", "Sun"]
    assert list(t.y) == [d["median"] for d in snap["weekday"]]
    assert t.error_y.array[1] == pytest.approx(snap["weekday"][1]["q95"] - snap["weekday"][1]["median"])
    assert t.error_y.arrayminus[1] == pytest.approx(snap["weekday"][1]["median"] - snap["weekday"][1]["q05"])
    assert any(s.y0 == 1 and s.y1 == 1 for s in fig.layout.shapes)
    assert any(s.y0 == 1 and s.name == "no weekday effect" for s in fig.layout.shapes)
    # the line is explained under the plot, never on the data
    key = [a for a in fig.layout.annotations if "no weekday effect" in a.text]
    assert len(key) == 1 and key[0].yref == "paper" and key[0].y == 0 and key[0].yshift < 0


def test_weekday_empty_state(snaps):
    fig = F.weekday_figure(snaps["snapshot_weekly_done"])
    assert len(fig.data) == 0
    assert _plain(fig.layout.annotations[0].text) == "Weekday effect not fitted (weekly series or switched off)"
    off = dict(snaps["snapshot_06_done"], weekday=None)
    assert _plain(F.weekday_figure(off).layout.annotations[0].text).startswith("Weekday effect not fitted")
    assert "appear" in _plain(F.weekday_figure(snaps["snapshot_00_init"]).layout.annotations[0].text)


# --------------------------------------------------------------- residuals

def test_residual_figure(snaps):
    snap = snaps["snapshot_06_done"]
    fig = F.residual_figure(snap)
    assert len(fig.data) == 2
    assert fig.data[0].mode == "markers"
    assert list(fig.data[0].y) == snap["checks"]["pearson"]
    assert fig.data[1].type == "bar" and list(fig.data[1].x) == ["Mon", "Tue", "Wed", "Thu", "Fri", "Sat", "Sun"]
    assert fig.layout.title.text == "90% predictive intervals cover 91% of values"
    weekly = F.residual_figure(snaps["snapshot_weekly_done"])
    assert len(weekly.data) == 1
    assert weekly.layout.title.text == "90% predictive intervals cover 92% of values"
    before = _as_json(F.residual_figure(snaps["snapshot_04_sampling"]))
    assert _as_json(F.apply_updates(before, F.residual_updates(snap))) == _as_json(fig)


def test_empty_figure():
    fig = F.empty_figure("Load a series to begin.")
    assert len(fig.data) == 0
    assert fig.layout.annotations[0].text == "Load a series to begin."
    fig.to_json()
    # a long message is wrapped into short lines, words kept whole, for narrow panels
    long = F.empty_figure("Traces appear once sampling starts (warm-up: iteration 50 of 139).")
    lines = long.layout.annotations[0].text.split("<br>")
    assert len(lines) == 2 and all(len(line) <= 40 for line in lines)
    assert " ".join(lines) == "Traces appear once sampling starts (warm-up: iteration 50 of 139)."


# --------------------------------------------- fields of the current engine

def test_v2_traces_use_draw_numbers_and_say_how_they_were_thinned(snaps):
    samp, done = snaps["snapshot_v2_sampling"], snaps["snapshot_v2_done"]
    name = "growth rate 1 (per day)"
    fig = F.trace_figure(done, name)
    assert "iteration" not in done["traces"]
    assert list(fig.data[0].x) == done["traces"]["draw"]
    assert fig.layout.xaxis.title.text == "Draw after warm-up"
    assert done["traces"]["thin"] == 2 and "every 2nd draw shown" in fig.layout.annotations[0].text
    assert samp["traces"]["thin"] == 1 and "shown" not in F.trace_figure(samp, name).layout.annotations[0].text
    before = _as_json(F.trace_figure(samp, name))
    after = _as_json(fig)
    assert _as_json(F.apply_updates(before, json.loads(json.dumps(F.trace_updates(done, name))))) == after
    # an old snapshot (iteration) keeps working
    assert list(F.trace_figure(snaps["snapshot_06_done"], name).data[0].x) == snaps["snapshot_06_done"]["traces"]["iteration"]


@pytest.mark.parametrize("name,step,word", [("snapshot_v2_done", 1, "day"), ("snapshot_v2_weekly_done", 7, "week")])
def test_v2_change_date_bins_are_whole_intervals_under_the_count_bars(name, step, word, snaps, daily, weekly):
    snap = snaps[name]
    series = _series_for(name, daily, weekly)
    assert snap["interval_days"] == step
    fig = F.changepoint_figure(series, snap)
    k = len(snap["changepoints"])
    counts_x = set(F.main_figure(series).data[F.MAIN_TRACE_INDEX["counts"]].x)
    for bars, shares in zip(fig.data[:k], snap["changepoint_histograms"]["counts"]):
        assert list(bars.width) == [step * F.MS_PER_DAY] * len(bars.x)
        assert set(bars.x) <= counts_x  # each bin sits on the bar of the interval it covers
        assert sum(bars.y) == pytest.approx(sum(shares))
    assert fig.layout.yaxis.title.text == f"Share of draws per {word}"


def test_v2_diagnostics_thresholds_come_from_the_snapshot(snaps):
    snap = {"phase": "sampling", "draws_per_chain": 120, "diagnostics": {
        "converged": False, "rhat_max": 1.06, "ess_bulk_min": 90.0, "ess_tail_min": 120.0,
        "criterion": "max R-hat < 1.01 and min bulk and tail ESS >= 400",  # stale text: the numbers win
        "rhat_threshold": 1.05, "ess_threshold": 100, "parameters": [
            {"name": "a", "rhat": 1.03, "ess_bulk": 150.0, "ess_tail": 120.0},
            {"name": "b", "rhat": 1.06, "ess_bulk": 90.0, "ess_tail": 120.0}]}}
    rows = {r["parameter"]: r["status"] for r in F.diagnostics_rows(snap)}
    assert rows == {"a": "ok", "b": "chains disagree (R-hat ≥ 1.05); too few effective draws (ESS < 100)"}
    summary = F.diagnostics_summary(snap)
    assert "(needs < 1.05)" in summary and "(needs ≥ 100)" in summary
    done = snaps["snapshot_v2_done"]
    assert done["diagnostics"]["rhat_threshold"] == 1.01 and done["diagnostics"]["ess_threshold"] == 400
    assert F.diagnostics_summary(done).startswith("Converged: max R-hat 1.00")
    assert all(r["status"] == "ok" for r in F.diagnostics_rows(done))


def test_v2_updates_reproduce_a_rebuild(snaps, daily):
    samp, done = snaps["snapshot_v2_sampling"], snaps["snapshot_v2_done"]
    for build, update in (
        (lambda s: F.main_figure(daily, s, TENTATIVE, highlight_segment=3),
         lambda s: F.main_updates(daily, s, TENTATIVE, highlight_segment=3)),
        (lambda s: F.changepoint_figure(daily, s), lambda s: F.changepoint_updates(daily, s)),
        (F.residual_figure, F.residual_updates),
    ):
        before, after = _as_json(build(samp)), _as_json(build(done))
        assert _as_json(F.apply_updates(before, json.loads(json.dumps(update(done))))) == after


def test_change_date_status_badge_follows_the_run(snaps, daily):
    samp, done = snaps["snapshot_v2_sampling"], snaps["snapshot_v2_done"]
    badge = F.changepoint_figure(daily, samp).layout.annotations[0]
    assert badge.visible is True and badge.text == F.PROVISIONAL_NOTE
    assert F.changepoint_figure(daily, done).layout.annotations[0].visible is False
    assert F.changepoint_updates(daily, done)["annotations"][0]["visible"] is False
    assert F.changepoint_figure(daily, _unconverged(done)).layout.annotations[0].text == F.NOT_CONVERGED_NOTE
    assert F.changepoint_figure(daily, done).layout.title.text == "Change dates: where the draws put them"
    # the residuals carry the same badge, patched the same way
    assert F.residual_figure(samp).layout.annotations[0].text == F.PROVISIONAL_NOTE
    assert F.residual_figure(done).layout.annotations[0].visible is False
    assert F.residual_updates(done)["annotations"][0] == _as_json(F.residual_figure(done))["layout"]["annotations"][0]


def test_v2_residuals_use_the_snapshot_interval(snaps):
    weekly = F.residual_figure(snaps["snapshot_v2_weekly_done"])
    assert weekly.data[0].x[0] == "2024-01-04 12:00:00"  # mid-week
    assert weekly.data[0].customdata[0] == "week of Mon 1 Jan 2024"
    assert weekly.layout.title.text == "90% predictive intervals cover 92% of values"
    daily = F.residual_figure(snaps["snapshot_v2_done"])
    assert daily.data[0].x[0] == "2026-01-05 12:00:00" and len(daily.data) == 2
    # the by-weekday panel sits under the residuals over time, not beside them
    assert daily.layout.yaxis2.domain[1] < daily.layout.yaxis.domain[0]
    assert daily.layout.xaxis.domain is None and daily.layout.xaxis2.domain is None  # both full width


def test_a_passing_rhat_never_reads_as_the_threshold_in_the_convergence_table():
    # 1.00996 passes "R-hat below 1.01": the row keeps it and every table shows 1.0099, not 1.010
    from bendline.app.reports.html import _diagnostics as report_table
    from bendline.app.web.callbacks.panels import diagnostics_table

    snap = {"diagnostics": {"criterion": "max R-hat < 1.01 and min bulk and tail ESS >= 400", "parameters": [
        {"name": "growth rate 3 (per day)", "rhat": 1.00996, "ess_bulk": 836.0, "ess_tail": 832.0}]}}
    rows = F.diagnostics_rows(snap)
    assert rows[0]["status"] == "ok" and rows[0]["rhat"] == 1.00996
    for shown in (str(diagnostics_table(rows)), report_table(snap)):
        assert "1.0099" in shown and "1.010" not in shown
