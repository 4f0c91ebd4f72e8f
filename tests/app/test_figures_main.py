"""Figure builders of the dashboard (app/web/figures/): every figure, and the main chart.

Every figure builds and is JSON-safe, with and without a snapshot; the main
chart's traces, updates, shapes, status note, axes and 7-day average; the
theme; every figure's height and margins. The example data are described in
figure_helpers.py; the side panels are tested in test_figures_panels.py.
"""

from __future__ import annotations

import json

import plotly.graph_objects as go
import pytest

from bendline.app.web import figures as F
from bendline.app.web import theme

from .figure_helpers import (
    ALL_SNAPSHOTS,
    DAILY_PHASES,
    TENTATIVE,
    _as_json,
    _rates_snapshot,
    _series_for,
    _unconverged,
)


# --------------------------------------------------------------- every figure

@pytest.mark.parametrize("name", ALL_SNAPSHOTS)
def test_every_figure_builds_and_is_json_safe(name, snaps, daily, weekly):
    snap = snaps[name]
    series = _series_for(name, daily, weekly)
    figs = [
        F.main_figure(series, snap, TENTATIVE),
        F.main_figure(series, snap, TENTATIVE, log_y=True, style="points", highlight_segment=2,
                      x_range=["2026-02-01", "2026-05-01"]),
        F.changepoint_figure(series, snap),
        F.changepoint_figure(series, snap, highlight_segment=1, x_range=["2026-02-01", "2026-05-01"]),
        F.rates_figure(snap),
        F.rates_figure(snap, highlight_segment=1),
        F.trace_figure(snap, "growth rate 1 (per day)"),
        F.trace_figure(snap, "no such quantity"),
        F.weekday_figure(snap),
        F.residual_figure(snap),
        F.empty_figure("No fit yet."),
    ]
    for fig in figs:
        assert isinstance(fig, go.Figure)
        text = fig.to_json()
        assert "NaN" not in text and "Infinity" not in text
        json.loads(text)
    json.dumps(F.diagnostics_rows(snap))
    assert isinstance(F.diagnostics_summary(snap), str)
    for updates in (F.main_updates(series, snap, TENTATIVE, highlight_segment=2),
                    F.changepoint_updates(series, snap), F.trace_updates(snap, "growth rate 1 (per day)"),
                    F.residual_updates(snap)):
        json.dumps(updates)


def test_figures_without_a_snapshot(daily):
    assert len(F.main_figure(daily).data) == len(F.MAIN_TRACES)
    for fig in (F.changepoint_figure(daily, None), F.rates_figure(None), F.trace_figure(None, "x"),
                F.weekday_figure(None), F.residual_figure(None)):
        assert len(fig.data) == 0
        assert fig.layout.annotations[0].text
    assert F.diagnostics_rows(None) == []
    assert F.diagnostics_summary(None) == "No fit yet."


# ---------------------------------------------------------------- main figure

def _trace_signature(fig):
    return [(t.type, t.name, t.yaxis) for t in fig.data]


def test_main_trace_order_and_count_do_not_depend_on_the_snapshot(snaps, daily, weekly):
    for style in ("bars", "points"):
        sigs = {name: _trace_signature(F.main_figure(daily, snaps[name], TENTATIVE, style=style))
                for name in DAILY_PHASES}
        sigs["none"] = _trace_signature(F.main_figure(daily, None, TENTATIVE, style=style))
        first = next(iter(sigs.values()))
        assert len(first) == len(F.MAIN_TRACES) == 14
        assert all(sig == first for sig in sigs.values())
    weekly_sig = _trace_signature(F.main_figure(weekly, snaps["snapshot_weekly_done"]))
    assert len(weekly_sig) == len(F.MAIN_TRACES)
    assert [t[0] for t in weekly_sig] == [t[0] for t in _trace_signature(F.main_figure(daily, None))]


def test_main_trace_roles(snaps, daily):
    fig = F.main_figure(daily, snaps["snapshot_06_done"])
    idx = F.MAIN_TRACE_INDEX
    band = snaps["snapshot_06_done"]["band"]
    assert fig.data[idx["counts"]].type == "bar"
    assert list(fig.data[idx["counts"]].y) == daily["values"]
    assert fig.data[idx["average_7day"]].name == "7-day centred average"
    assert list(fig.data[idx["trend_median"]].y) == band["trend_q50"]
    assert list(fig.data[idx["trend_low"]].y) == band["trend_q05"]
    assert list(fig.data[idx["trend_high"]].y) == band["trend_q95"]
    assert fig.data[idx["trend_high"]].fill == "tonexty"
    assert list(fig.data[idx["predictive_high"]].y) == band["predictive_q95"]
    assert fig.data[idx["predictive_high"]].name == "90% predictive interval: where counts should fall"
    proj = snaps["snapshot_06_done"]["projection"]
    median = fig.data[idx["projection_median"]]
    assert median.line.dash == "dash"
    assert "if the current trend continues" in median.name
    assert list(median.y)[1:] == proj["trend_q50"]  # joined to the last fitted value
    assert list(median.y)[0] == band["trend_q50"][-1]
    assert not any("forecast" in (t.name or "").lower() for t in fig.data)
    medians = fig.data[idx["change_date_medians"]]
    assert medians.yaxis == "y2"
    assert list(medians.x) == [F.day_to_x(daily, cp["median_day"]) for cp in snaps["snapshot_06_done"]["changepoints"]]
    intervals = fig.data[idx["change_date_intervals"]]
    cp1 = snaps["snapshot_06_done"]["changepoints"][0]
    assert list(intervals.x)[:3] == [F.day_to_x(daily, cp1["q05_day"]), F.day_to_x(daily, cp1["q95_day"]), None]
    points = F.main_figure(daily, snaps["snapshot_06_done"], style="points")
    assert points.data[idx["counts"]].type == "scatter" and points.data[idx["counts"]].mode == "markers"
    with pytest.raises(ValueError):
        F.main_figure(daily, None, style="lines")


def test_counts_sit_at_interval_midpoints_with_full_width(daily, weekly):
    d = F.main_figure(daily).data[F.MAIN_TRACE_INDEX["counts"]]
    assert d.x[0] == "2026-01-05 12:00:00" and d.width == F.MS_PER_DAY
    w = F.main_figure(weekly).data[F.MAIN_TRACE_INDEX["counts"]]
    assert w.x[0] == "2024-01-04 12:00:00" and w.width == 7 * F.MS_PER_DAY
    # weekly series: no 7-day average (empty trace kept for a stable order)
    avg = F.main_figure(weekly).data[F.MAIN_TRACE_INDEX["average_7day"]]
    assert list(avg.x) == [] and list(avg.y) == []


@pytest.mark.parametrize("old,new", [
    ("snapshot_00_init", "snapshot_02_warmup"),
    ("snapshot_02_warmup", "snapshot_04_sampling"),
    ("snapshot_04_sampling", "snapshot_06_done"),
    ("snapshot_06_done", "snapshot_00_init"),
    (None, "snapshot_06_done"),
])
@pytest.mark.parametrize("highlight", [None, 2])
def test_main_updates_reproduce_a_rebuild(old, new, highlight, snaps, daily):
    a = snaps[old] if old else None
    b = snaps[new]
    before = _as_json(F.main_figure(daily, a, TENTATIVE, highlight_segment=highlight))
    after = _as_json(F.main_figure(daily, b, TENTATIVE, highlight_segment=highlight))
    updates = F.main_updates(daily, b, TENTATIVE, highlight_segment=highlight)
    patched = _as_json(F.apply_updates(before, json.loads(json.dumps(updates))))
    assert patched["data"] == after["data"]
    assert patched["layout"]["annotations"] == after["layout"]["annotations"]
    assert patched["layout"]["shapes"] == after["layout"]["shapes"]
    assert patched == after  # nothing else differs either
    assert set(int(i) for i in updates["traces"]) == set(F.MAIN_SNAPSHOT_TRACES)


def test_main_updates_weekly(snaps, weekly):
    before = _as_json(F.main_figure(weekly, None))
    after = _as_json(F.main_figure(weekly, snaps["snapshot_weekly_done"]))
    assert _as_json(F.apply_updates(before, F.main_updates(weekly, snaps["snapshot_weekly_done"]))) == after


def test_apply_updates_refuses_a_figure_of_another_structure(snaps, daily):
    fig = F.empty_figure("waiting")
    with pytest.raises(ValueError):
        F.apply_updates(fig, F.main_updates(daily, snaps["snapshot_06_done"]))


def test_tentative_change_dates_are_the_first_shapes_in_order(snaps, daily):
    cps = [{"day": 120.25, "spread_days": 5.0}, {"day": 40.0, "spread_days": 3.0}, {"day": 200.0, "spread_days": 0}]
    fig = F.main_figure(daily, snaps["snapshot_06_done"], cps, highlight_segment=3)
    shapes = fig.layout.shapes
    k = len(cps)
    assert len(shapes) == 2 * k + 1
    for i, cp in enumerate(cps):
        line = shapes[i]
        assert line.type == "line" and line.editable is True
        assert line.xref == "x" and line.yref == "paper"
        assert line.x0 == line.x1 == F.day_to_x(daily, cp["day"])
        assert F.x_to_day(daily, line.x0) == pytest.approx(cp["day"], abs=1e-4)
    assert shapes[0].x0 == "2026-05-05 06:00:00"  # 120.25 days after 5 Jan 2026
    assert shapes[1].x0 == "2026-02-14"
    for i, cp in enumerate(cps):
        rect = shapes[k + i]
        assert rect.type == "rect" and not rect.editable
        assert rect.x0 == F.day_to_x(daily, cp["day"] - cp["spread_days"])
        assert rect.x1 == F.day_to_x(daily, cp["day"] + cp["spread_days"])
    seg3 = snaps["snapshot_06_done"]["segments"][2]
    highlight = shapes[2 * k]
    assert highlight.type == "rect" and not highlight.editable and highlight.visible is not False
    assert highlight.x0 == F.day_to_x(daily, seg3["start_day"])
    assert highlight.x1 == F.day_to_x(daily, seg3["end_day"])
    # no editable shape other than the analyst's lines
    assert [bool(s.editable) for s in shapes] == [True] * k + [False] * (k + 1)


def test_x_to_day_reads_what_plotly_reports(daily):
    assert F.x_to_day(daily, "2026-01-05") == 0
    assert F.x_to_day(daily, "2026-03-18 20:40:12.3456") == pytest.approx(72 + (20 * 3600 + 40 * 60 + 12.3456) / 86400)
    assert F.x_to_day(daily, "2026-01-06T12:00:00") == pytest.approx(1.5)


def test_highlight_hidden_without_segments(snaps, daily):
    fig = F.main_figure(daily, snaps["snapshot_00_init"], TENTATIVE, highlight_segment=2)
    assert fig.layout.shapes[4].visible is False


def _status(fig):
    ann = fig.layout.annotations[F.MAIN_STATUS_ANNOTATION]
    return ann.text if ann.visible is not False else ""


def test_provisional_note_until_final_and_converged(snaps, daily):
    for name in ("snapshot_00_init", "snapshot_02_warmup", "snapshot_04_sampling"):
        assert _status(F.main_figure(daily, snaps[name])) == "Provisional: sampling in progress, not yet converged"
    done = snaps["snapshot_06_done"]
    assert _status(F.main_figure(daily, done)) == ""
    assert all("Provisional" not in (a.text or "") or a.visible is False for a in F.main_figure(daily, done).layout.annotations)
    assert _status(F.main_figure(daily, _unconverged(done))) == "Not reportable: do not report"
    assert F.main_updates(daily, done)["annotations"][0]["visible"] is False
    assert F.main_updates(daily, snaps["snapshot_04_sampling"])["annotations"][0]["visible"] is True
    # converged, but a warning invalidates the numbers: the figure says so too
    blocked = dict(done, diagnostics=dict(done["diagnostics"], reportable=False, warnings=[
        {"kind": "constraint", "message": "Change date 1 sits against the limit", "parameter": None,
         "blocking": True}]))
    assert _status(F.main_figure(daily, blocked)) == "Not reportable: do not report"


def test_log_axis(daily, snaps):
    lin = F.main_figure(daily, snaps["snapshot_06_done"])
    log = F.main_figure(daily, snaps["snapshot_06_done"], log_y=True)
    assert lin.layout.yaxis.type == "linear"
    assert log.layout.yaxis.type == "log"
    assert "log" in log.layout.yaxis.title.text
    assert "per day" in lin.layout.yaxis.title.text
    assert lin.layout.uirevision == log.layout.uirevision  # x zoom survives the switch
    assert lin.layout.yaxis.uirevision != log.layout.yaxis.uirevision


def test_x_range_and_uirevision(daily, snaps):
    fig = F.main_figure(daily, snaps["snapshot_06_done"], x_range=["2026-03-01", "2026-04-01"])
    assert list(fig.layout.xaxis.range) == ["2026-03-01", "2026-04-01"]
    assert fig.layout.xaxis.type == "date"
    assert F.main_figure(daily, None).layout.uirevision == F.main_figure(daily, snaps["snapshot_04_sampling"]).layout.uirevision


# -------------------------------------------------------------- 7-day average

def test_centred_average_needs_four_of_seven_days():
    values = [1, 2, 3, 4, 5, 6, 7, 8, None, None, None, 12, 13, 14]
    avg = F.centred_average_7day(values)
    assert len(avg) == len(values)
    # day 0: window days -3..3, only 0..3 exist (4 values) -> mean of 1..4
    assert avg[0] == pytest.approx(2.5)
    assert avg[3] == pytest.approx(4.0)  # full window 1..7, centred on 4
    assert avg[4] == pytest.approx(5.0)  # 2..8
    # day 7: window 4..10 holds 5,6,7,8 (4 present) -> 6.5
    assert avg[7] == pytest.approx(6.5)
    # day 8: window 5..11 holds 6,7,8,12 -> 8.25
    assert avg[8] == pytest.approx(8.25)
    # day 9: window 6..12 holds 7,8,12,13 (4 present)
    assert avg[9] == pytest.approx(10.0)
    # day 13 (last): window 10..16 holds 12,13,14 (3 present) -> missing
    assert avg[13] is None
    # day 12: window 9..15 holds 12, 13, 14 only -> missing
    assert avg[12] is None


def test_centred_average_is_on_the_main_chart():
    series = {"start": "2026-01-01", "interval_days": 1, "name": "tiny",
              "values": [10, None, None, None, 10, 20, 30, 40, float("nan"), 50]}
    fig = F.main_figure(series)
    avg = list(fig.data[F.MAIN_TRACE_INDEX["average_7day"]].y)
    assert avg == F.centred_average_7day(series["values"])
    assert avg[0] is None  # days 0..3 hold one value
    assert avg[4] == pytest.approx((10 + 20 + 30 + 40) / 4)  # window 1..7 holds 10, 20, 30, 40
    assert fig.data[F.MAIN_TRACE_INDEX["average_7day"]].x == fig.data[F.MAIN_TRACE_INDEX["counts"]].x
    fig.to_json()


# ------------------------------------------------------------------ theme

def test_theme_base_layout_merges():
    layout = theme.base_layout(xaxis={"title": {"text": "Date"}}, yaxis3={"visible": False})
    assert layout["xaxis"]["title"]["text"] == "Date"
    assert layout["xaxis"]["gridcolor"] == theme.GRID  # kept from the base
    assert layout["yaxis3"]["visible"] is False and layout["yaxis3"]["linecolor"] == theme.INK
    assert 14 <= layout["font"]["size"] <= 16
    assert theme.base_layout()["xaxis"].get("title", {}).get("text") is None
    assert theme.rgba("#0072B2", 0.3) == "rgba(0,114,178,0.3)"


# ------------------------------------------- sizes (the app sets no heights)

def _every_figure(snap, series):
    return [
        F.main_figure(series, snap, TENTATIVE), F.changepoint_figure(series, snap),
        F.rates_figure(snap), F.trace_figure(snap, "growth rate 1 (per day)"), F.weekday_figure(snap),
        F.residual_figure(snap), F.empty_figure("waiting"),
    ]


@pytest.mark.parametrize("name", ALL_SNAPSHOTS + (None,))
def test_every_figure_sets_its_height_and_room_for_titles(name, snaps, daily, weekly):
    snap = snaps[name] if name else None
    for fig in _every_figure(snap, _series_for(name or "", daily, weekly)):
        assert isinstance(fig.layout.height, (int, float)) and 250 <= fig.layout.height <= 900
        margin = fig.layout.margin
        assert None not in (margin.t, margin.b, margin.l, margin.r)
        if fig.layout.title.text:
            assert margin.t >= 60  # the title, and the line or badge under it
        if fig.layout.showlegend is not False and len(fig.data) > 1 and fig.layout.legend.orientation == "h":
            assert fig.layout.legend.yref == "container" and margin.b >= 80  # legend under the plot
    assert F.empty_figure("x", height=200).layout.height == 200


def test_rates_height_grows_by_one_row_per_segment():
    snap = _rates_snapshot()
    three = F.rates_figure(snap).layout.height
    two = F.rates_figure(dict(snap, segments=snap["segments"][:2])).layout.height
    assert three - two == F.rates.ROW_PX
