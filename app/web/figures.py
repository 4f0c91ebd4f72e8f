"""Plotly figures of the dashboard: pure functions from plain data to figures.

Every builder takes the plain dicts the engine and the loader produce (a
``Series.to_dict()``, a driver snapshot, the analyst's tentative change dates)
and returns a ``plotly.graph_objects.Figure``. Nothing here keeps state,
registers a Dash callback or computes a statistic: every quantile was computed
by the engine, and figures only convert units for display (a growth rate per
day to percent per day, a day offset to a calendar date).

Time placement
--------------
Value ``t`` of a series counts the interval ``[start + t*I, start + (t+1)*I)``
(``I`` = ``interval_days``). Bars, points and bands are drawn at the interval's
midpoint with the interval's full width, so a change date at day offset
``d`` (drawn at ``start + d`` days) falls on the bar of the interval that holds
it, for daily and weekly series alike. :func:`day_to_x` and :func:`x_to_day`
convert between day offsets and the axis' date strings; a drag handler uses
:func:`x_to_day` on ``relayoutData['shapes[i].x0']``.

Updating in place
-----------------
Figures that change while sampling runs have an ``*_updates`` companion that
returns only what changes between snapshots::

    {"trace_count": int,                  # the figure's number of traces
     "traces": {index: {property: value}},  # top-level trace properties
     "annotations": {index: annotation},    # whole annotations (optional)
     "shapes": {index: shape},              # whole shapes (optional)
     "title": str}                          # layout.title.text (optional)

Each trace entry replaces whole top-level properties (``x``, ``y``,
``customdata``, ``marker`` ...), which maps one to one onto ``dash.Patch``
assignments (``patch["data"][i][key] = value``). When ``trace_count``
differs from the figure on screen, rebuild the figure instead.
:func:`apply_updates` applies an update to a figure dict (used by the tests to
prove the updates agree with a full rebuild).
"""

from __future__ import annotations

import copy
import datetime as _dt
import math
import re

import plotly.graph_objects as go
from plotly.subplots import make_subplots

from . import theme as th

MS_PER_DAY = 86_400_000
_MONTHS = ("Jan", "Feb", "Mar", "Apr", "May", "Jun", "Jul", "Aug", "Sep", "Oct", "Nov", "Dec")
_WEEKDAYS = ("Mon", "Tue", "Wed", "Thu", "Fri", "Sat", "Sun")

#: Default convergence thresholds (used when the criterion text cannot be read).
RHAT_LIMIT = 1.01
ESS_MIN = 400

PROVISIONAL_NOTE = "Provisional: sampling in progress, not yet converged"
NOT_CONVERGED_NOTE = "Not converged: do not report"
NO_FIT_NOTE = "No model fit yet: showing the data only"

#: Trace order of :func:`main_figure` (fixed whatever the snapshot).
MAIN_TRACES = (
    "predictive_low",  # 0  90% predictive interval, lower edge (no legend)
    "predictive_high",  # 1  upper edge, filled down to 0
    "counts",  # 2  reported counts (bars or points)
    "average_7day",  # 3  7-day centred average (empty for weekly series)
    "trend_low",  # 4  trend 90% credible interval, lower edge
    "trend_high",  # 5  upper edge, filled down to 4
    "trend_median",  # 6  trend posterior median
    "projection_predictive_low",  # 7  if the trend continues: predictive lower edge
    "projection_predictive_high",  # 8  upper edge, filled down to 7
    "projection_low",  # 9  if the trend continues: trend 90% credible interval, lower
    "projection_high",  # 10 upper edge, filled down to 9
    "projection_median",  # 11 trend median, dashed
    "change_date_intervals",  # 12 posterior change dates: 90% intervals (top strip)
    "change_date_medians",  # 13 posterior change dates: medians (top strip)
)
MAIN_TRACE_INDEX = {name: i for i, name in enumerate(MAIN_TRACES)}
#: Traces of :func:`main_figure` that depend on the snapshot (the rest on the series only).
MAIN_SNAPSHOT_TRACES = tuple(i for i, n in enumerate(MAIN_TRACES) if n not in ("counts", "average_7day"))
#: Index of the status note in ``layout.annotations`` of :func:`main_figure`.
MAIN_STATUS_ANNOTATION = 0

#: Tick values of the log count axis (1-2-5 steps; Plotly shows those in range).
_LOG_TICKS = tuple(m * 10 ** e for e in range(0, 8) for m in (1, 2, 5))

_CHANGE_STRIP_Y = 0.93  # height of the posterior change-date strip (fraction of the plot)


# ---------------------------------------------------------------- small helpers

def _num(v):
    """A finite float, or None."""
    if v is None:
        return None
    try:
        f = float(v)
    except (TypeError, ValueError):
        return None
    return f if math.isfinite(f) else None


def _nums(values):
    return [_num(v) for v in (values or [])]


def _parse_date(s):
    """A ``datetime.datetime`` from an ISO date or date-time string."""
    if isinstance(s, _dt.datetime):
        return s
    if isinstance(s, _dt.date):
        return _dt.datetime(s.year, s.month, s.day)
    return _dt.datetime.fromisoformat(str(s).strip().replace("T", " ").rstrip("Z"))


def _fmt_x(when):
    """Plotly date string: ``YYYY-MM-DD`` at midnight, else with the time."""
    when = when.replace(microsecond=0) if when.microsecond < 500_000 else (
        when + _dt.timedelta(microseconds=1_000_000 - when.microsecond))
    if when.hour == when.minute == when.second == 0:
        return when.strftime("%Y-%m-%d")
    return when.strftime("%Y-%m-%d %H:%M:%S")


def _start(series):
    return _parse_date(series["start"])


def _interval(series):
    return int(series.get("interval_days") or 1)


def day_to_x(series, day):
    """Axis date string of a day offset from the series' start.

    Parameters
    ----------
    series : dict
        ``Series.to_dict()`` (only ``start`` is read).
    day : float
        Days from the start date's midnight (may be fractional).

    Returns
    -------
    str
        ``"YYYY-MM-DD"`` or ``"YYYY-MM-DD HH:MM:SS"``.
    """
    return _fmt_x(_start(series) + _dt.timedelta(days=float(day)))


def x_to_day(series, x):
    """Day offset from the series' start of an axis date (inverse of :func:`day_to_x`).

    Parameters
    ----------
    series : dict
        ``Series.to_dict()`` (only ``start`` is read).
    x : str or float
        A date string as Plotly reports it in ``relayoutData``
        (``"2026-03-18 20:40:12.3456"``), or milliseconds since the epoch.

    Returns
    -------
    float
        Days (fractional).
    """
    if isinstance(x, (int, float)):
        when = _dt.datetime(1970, 1, 1) + _dt.timedelta(milliseconds=float(x))
    else:
        when = _parse_date(x)
    return (when - _start(series)).total_seconds() / 86400.0


def _mid_x(date_str, interval_days):
    return _fmt_x(_parse_date(date_str) + _dt.timedelta(days=interval_days / 2.0))


def _label_date(d, year=True):
    d = _parse_date(d)
    return f"{d.day} {_MONTHS[d.month - 1]} {d.year}" if year else f"{d.day} {_MONTHS[d.month - 1]}"


def _day_name(date_str):
    d = _parse_date(date_str)
    return f"{_WEEKDAYS[d.weekday()]} {_label_date(d)}"


def _pct_per_day(r):
    """Percent change per day of a continuous growth rate r (per day)."""
    r = _num(r)
    return None if r is None else 100.0 * (math.exp(r) - 1.0)


def _fmt_pct(p):
    if p is None:
        return "–"
    return f"{p:+.2f}" if abs(p) < 10 else f"{p:+.1f}"


def _fmt_days(d, decimals=None):
    """Days for display: one decimal below 10 days, whole days above (or as told)."""
    if d is None:
        return None
    if decimals is None:
        decimals = 1 if d < 10 else 0
    return f"{d:,.{decimals}f}"


def _fmt_prob(p):
    p = _num(p)
    if p is None:
        return "–"
    if p >= 0.995:
        return "> 99%"
    if p <= 0.005:
        return "< 1%"
    return f"{100 * p:.0f}%"


def _is_daily(series):
    return _interval(series) == 1


def _has_fit(snapshot):
    return bool(snapshot) and bool(snapshot.get("band"))


def _change_colour(j):
    return th.CHANGE_DATE_COLOURS[j % len(th.CHANGE_DATE_COLOURS)]


def is_final(snapshot):
    """True when the snapshot is the last of a run and its diagnostics converged.

    Parameters
    ----------
    snapshot : dict or None

    Returns
    -------
    bool
    """
    if not snapshot or snapshot.get("phase") != "done":
        return False
    diag = snapshot.get("diagnostics") or {}
    return bool(diag.get("converged"))


def status_note(snapshot):
    """The warning a figure of this snapshot must carry, or None when final.

    Parameters
    ----------
    snapshot : dict or None

    Returns
    -------
    str or None
        :data:`NO_FIT_NOTE` without a snapshot, :data:`PROVISIONAL_NOTE`
        while the run goes on, :data:`NOT_CONVERGED_NOTE` when it ended
        unconverged, None when final and converged.
    """
    if not snapshot:
        return NO_FIT_NOTE
    if snapshot.get("phase") != "done":
        return PROVISIONAL_NOTE
    return None if is_final(snapshot) else NOT_CONVERGED_NOTE


def empty_figure(message):
    """A blank panel carrying one centred message (before any data or fit).

    Parameters
    ----------
    message : str

    Returns
    -------
    plotly.graph_objects.Figure
    """
    layout = th.base_layout(
        height=300,
        xaxis={"visible": False}, yaxis={"visible": False},
        margin={"l": 20, "r": 20, "t": 20, "b": 20},
        annotations=[_centred_note(message)],
    )
    return go.Figure(layout=layout)


def _centred_note(message):
    return {
        "text": message, "xref": "paper", "yref": "paper", "x": 0.5, "y": 0.5,
        "xanchor": "center", "yanchor": "middle", "showarrow": False,
        "font": {"size": th.NOTE_SIZE, "color": th.MUTED_INK},
    }


def apply_updates(figure, updates):
    """Apply an ``*_updates`` dict to a figure dict, returning a new dict.

    Parameters
    ----------
    figure : dict or plotly.graph_objects.Figure
        ``fig.to_dict()`` or ``json.loads(fig.to_json())``.
    updates : dict
        As returned by :func:`main_updates` and the other ``*_updates``.

    Returns
    -------
    dict
        A deep copy of ``figure`` with the updates applied.

    Raises
    ------
    ValueError
        When the figure's trace count differs from ``updates["trace_count"]``
        (the figure must be rebuilt instead).
    """
    fig = copy.deepcopy(figure.to_dict() if hasattr(figure, "to_dict") else figure)
    data = fig.setdefault("data", [])
    count = updates.get("trace_count")
    if count is not None and count != len(data):
        raise ValueError(f"figure has {len(data)} traces, the updates are for {count}: rebuild it")
    for index, props in (updates.get("traces") or {}).items():
        data[int(index)].update(copy.deepcopy(props))
    layout = fig.setdefault("layout", {})
    for key in ("annotations", "shapes"):
        for index, item in (updates.get(key) or {}).items():
            items = layout.setdefault(key, [])
            index = int(index)
            while len(items) <= index:
                items.append({})
            items[index] = copy.deepcopy(item)
    if "title" in updates:
        title = layout.get("title")
        layout["title"] = dict(title) if isinstance(title, dict) else {}
        layout["title"]["text"] = updates["title"]
    return fig


# ------------------------------------------------------------------- main chart

def centred_average_7day(values):
    """7-day centred average of daily counts, for display.

    The value at day t is the mean of the values present among days t-3 to
    t+3, given only where at least 4 of those 7 days are present (days
    outside the series count as absent).

    Parameters
    ----------
    values : list of float or None
        Daily counts, None (or NaN) where missing.

    Returns
    -------
    list of float or None
        Same length as ``values``, counts per day.
    """
    vals = _nums(values)
    out = []
    n = len(vals)
    for t in range(n):
        window = [vals[i] for i in range(t - 3, t + 4) if 0 <= i < n and vals[i] is not None]
        out.append(sum(window) / len(window) if len(window) >= 4 else None)
    return out


def _series_x(series):
    start = _start(series)
    step = _interval(series)
    return [_fmt_x(start + _dt.timedelta(days=step * (t + 0.5))) for t in range(len(series.get("values") or []))]


def _series_labels(series):
    start = _start(series)
    step = _interval(series)
    labels = []
    for t in range(len(series.get("values") or [])):
        d = start + _dt.timedelta(days=step * t)
        labels.append(_day_name(d) if step == 1 else f"week of {_day_name(d)}")
    return labels


def _band_x(dates, interval_days):
    return [_mid_x(d, interval_days) for d in dates]


def _status_annotation(snapshot):
    note = status_note(snapshot)
    ann = {
        "name": "status", "text": note or "", "visible": note is not None,
        "xref": "paper", "yref": "paper", "x": 0.0, "y": 1.0, "xanchor": "left", "yanchor": "bottom",
        "yshift": 6, "showarrow": False, "align": "left",
        "font": {"size": th.NOTE_SIZE, "color": th.WARNING_TEXT},
        "bgcolor": th.WARNING_FILL, "bordercolor": th.WARNING_BORDER, "borderwidth": 2, "borderpad": 4,
    }
    if note == NO_FIT_NOTE:
        ann.update(bgcolor=th.WHITE, bordercolor=th.GRID, font={"size": th.NOTE_SIZE, "color": th.MUTED_INK})
    return ann


def _segment_span(series, snapshot, segment):
    """(x0, x1) axis dates of a 1-based segment, or None."""
    if segment is None or not snapshot:
        return None
    for seg in snapshot.get("segments") or []:
        if seg.get("index") == segment:
            if _num(seg.get("start_day")) is not None and _num(seg.get("end_day")) is not None:
                return day_to_x(series, seg["start_day"]), day_to_x(series, seg["end_day"])
            return _fmt_x(_parse_date(seg["start_date"])), _fmt_x(_parse_date(seg["end_date"]))
    return None


def _highlight_shape(series, snapshot, segment, *, yref="paper"):
    span = _segment_span(series, snapshot, segment)
    x0, x1 = span if span else (series["start"], series["start"])
    return {
        "type": "rect", "name": "highlighted segment", "xref": "x", "yref": yref,
        "x0": x0, "x1": x1, "y0": 0, "y1": 1, "fillcolor": th.HIGHLIGHT, "line": {"width": 0},
        "layer": "below", "editable": False, "visible": span is not None,
    }


def _main_dynamic(series, snapshot):
    """Snapshot-dependent properties of main_figure's traces, by index."""
    step = _interval(series)
    dyn = {}
    band = (snapshot or {}).get("band") or {}
    bx = _band_x(band.get("dates") or [], step)
    t05, t50, t95 = (_nums(band.get(k)) for k in ("trend_q05", "trend_q50", "trend_q95"))
    p05, p95 = _nums(band.get("predictive_q05")), _nums(band.get("predictive_q95"))
    if not bx:
        t05 = t50 = t95 = p05 = p95 = []
    dyn[0] = {"x": bx, "y": p05}
    dyn[1] = {"x": bx, "y": p95, "customdata": [[a, b] for a, b in zip(p05, p95)]}
    dyn[4] = {"x": bx, "y": t05}
    dyn[5] = {"x": bx, "y": t95}
    dyn[6] = {"x": bx, "y": t50, "customdata": [[a, b] for a, b in zip(t05, t95)]}

    proj = (snapshot or {}).get("projection") or {}
    px = _band_x(proj.get("dates") or [], step)
    q05, q95 = _nums(proj.get("q05")), _nums(proj.get("q95"))
    r05, r50, r95 = (_nums(proj.get(k)) for k in ("trend_q05", "trend_q50", "trend_q95"))
    if not px:
        q05 = q95 = r05 = r50 = r95 = []
    elif bx:
        # join the projection to the last fitted interval so the lines read as one
        px = [bx[-1]] + px
        q05, q95 = [p05[-1]] + q05, [p95[-1]] + q95
        r05, r50, r95 = [t05[-1]] + r05, [t50[-1]] + r50, [t95[-1]] + r95
    dyn[7] = {"x": px, "y": q05}
    dyn[8] = {"x": px, "y": q95, "customdata": [[a, b] for a, b in zip(q05, q95)]}
    dyn[9] = {"x": px, "y": r05}
    dyn[10] = {"x": px, "y": r95}
    dyn[11] = {"x": px, "y": r50, "customdata": [[a, b] for a, b in zip(r05, r95)]}

    cps = (snapshot or {}).get("changepoints") or []
    ix, iy, mx, my, text, custom, colours = [], [], [], [], [], [], []
    for j, cp in enumerate(cps):
        med, lo, hi = (_num(cp.get(k)) for k in ("median_day", "q05_day", "q95_day"))
        if med is None:
            continue
        if lo is not None and hi is not None:
            ix += [day_to_x(series, lo), day_to_x(series, hi), None]
            iy += [_CHANGE_STRIP_Y, _CHANGE_STRIP_Y, None]
        mx.append(day_to_x(series, med))
        my.append(_CHANGE_STRIP_Y)
        number = cp.get("index", j + 1)
        text.append(str(number))
        custom.append([
            number,
            _label_date(cp["median_date"]) if cp.get("median_date") else "–",
            _label_date(cp["q05_date"]) if cp.get("q05_date") else "–",
            _label_date(cp["q95_date"]) if cp.get("q95_date") else "–",
        ])
        colours.append(_change_colour(j))
    dyn[12] = {"x": ix, "y": iy}
    dyn[13] = {
        "x": mx, "y": my, "text": text, "customdata": custom,
        "marker": {"symbol": "diamond", "size": 15, "color": colours,
                   "line": {"color": th.INK, "width": 1.5}},
    }
    return dyn


def _main_shapes(series, snapshot, changepoints, highlight_segment):
    lines, spreads = [], []
    for i, cp in enumerate(changepoints or ()):
        day = float(cp["day"])
        spread = abs(_num(cp.get("spread_days")) or 0.0)
        x = day_to_x(series, day)
        lines.append({
            "type": "line", "name": f"tentative change date {i + 1}",
            "xref": "x", "yref": "paper", "x0": x, "x1": x, "y0": 0, "y1": 1,
            "line": {"color": th.TENTATIVE_LINE, "width": th.LINE_STRONG, "dash": "dash"},
            "editable": True, "layer": "above",
            "label": {"text": f"your date {i + 1}", "textposition": "start", "textangle": -90,
                      "xanchor": "left", "font": {"size": th.SMALL_SIZE, "color": th.TENTATIVE_LINE}},
            "showlegend": i == 0, "legendgroup": "tentative",
            "legendrank": 900,
        })
        if i == 0:
            lines[0]["name"] = "your tentative change dates (drag to move)"
        spreads.append({
            "type": "rect", "name": f"tentative change date {i + 1} ± spread",
            "xref": "x", "yref": "paper", "x0": day_to_x(series, day - spread),
            "x1": day_to_x(series, day + spread), "y0": 0, "y1": 1,
            "fillcolor": th.TENTATIVE_SPREAD, "line": {"width": 0}, "layer": "below", "editable": False,
        })
    shapes = lines + spreads
    if highlight_segment is not None:
        shapes.append(_highlight_shape(series, snapshot, highlight_segment))
    return shapes


def main_figure(series, snapshot=None, changepoints=(), *, log_y=False, style="bars",
                highlight_segment=None, x_range=None):
    """Counts with the fitted trend, its intervals, the projection and the change dates.

    Parameters
    ----------
    series : dict
        ``Series.to_dict()``: ``start`` (ISO date), ``interval_days`` (1 or
        7), ``name``, ``values`` (counts per interval, None where missing).
    snapshot : dict, optional
        Engine snapshot; without one (or before its first band) only the data
        is drawn and the model traces are empty.
    changepoints : sequence of dict
        The analyst's tentative change dates, ``{"day": days from the start,
        "spread_days": prior sd in days}``. Drawn as editable vertical lines
        ``layout.shapes[0..k-1]`` in this order; their ± spread shading
        follows as ``shapes[k..2k-1]``.
    log_y : bool
        Log count axis.
    style : {"bars", "points"}
        How the counts are drawn.
    highlight_segment : int, optional
        1-based segment to shade (``shapes[2k]``; hidden while the snapshot
        has no such segment).
    x_range : [str, str], optional
        Date range of the x axis (e.g. from a linked panel's zoom).

    Returns
    -------
    plotly.graph_objects.Figure
        Traces in the order of :data:`MAIN_TRACES`, always 14 whatever the
        snapshot; the status note is ``layout.annotations[0]``.
    """
    if style not in ("bars", "points"):
        raise ValueError(f"style must be 'bars' or 'points', not {style!r}")
    step = _interval(series)
    per = "day" if step == 1 else "week"
    values = _nums(series.get("values"))
    sx = _series_x(series)
    labels = _series_labels(series)
    dyn = _main_dynamic(series, snapshot)

    skip = {"hoverinfo": "skip", "showlegend": False, "mode": "lines", "line": {"width": 0}}
    traces = [None] * len(MAIN_TRACES)
    traces[0] = go.Scatter(name="predictive interval, lower edge", legendgroup="predictive", **skip, **dyn[0])
    traces[1] = go.Scatter(
        name="90% predictive interval: where counts should fall", legendgroup="predictive",
        mode="lines", line={"width": 0}, fill="tonexty", fillcolor=th.PREDICTIVE_BAND, legendrank=300,
        hovertemplate="where counts should fall (90%%): %%{customdata[0]:,.0f} to %%{customdata[1]:,.0f} per %s"
                      "<extra></extra>" % per,
        **dyn[1])
    count_hover = "%{customdata}: %{y:,.0f} reported<extra></extra>"
    if style == "bars":
        traces[2] = go.Bar(
            name="reported counts", x=sx, y=values, customdata=labels, width=step * MS_PER_DAY,
            marker={"color": th.COUNT_GREY, "line": {"width": 0}}, hovertemplate=count_hover, legendrank=100)
    else:
        traces[2] = go.Scatter(
            name="reported counts", x=sx, y=values, customdata=labels, mode="markers",
            marker={"color": th.POINT_GREY, "size": 6 if step == 1 else 8}, hovertemplate=count_hover,
            legendrank=100)
    if step == 1:
        avg = centred_average_7day(values)
        traces[3] = go.Scatter(
            name="7-day centred average", x=sx, y=avg, mode="lines", connectgaps=False,
            line={"color": th.AVERAGE_LINE, "width": th.LINE_THIN},
            hovertemplate="7-day centred average: %{y:,.1f}<extra></extra>", legendrank=200)
    else:
        traces[3] = go.Scatter(name="7-day centred average", x=[], y=[], mode="lines", showlegend=False,
                               hoverinfo="skip", line={"color": th.AVERAGE_LINE, "width": th.LINE_THIN})
    traces[4] = go.Scatter(name="trend interval, lower edge", legendgroup="trend_band", **skip, **dyn[4])
    traces[5] = go.Scatter(
        name="trend: 90% credible interval", legendgroup="trend_band", mode="lines", line={"width": 0},
        fill="tonexty", fillcolor=th.TREND_BAND, hoverinfo="skip", legendrank=410, **dyn[5])
    traces[6] = go.Scatter(
        name="trend: posterior median", mode="lines", line={"color": th.TREND_LINE, "width": th.LINE_STRONG},
        hovertemplate="trend: %{y:,.1f} per " + per
                      + " (90% credible interval %{customdata[0]:,.1f} to %{customdata[1]:,.1f})<extra></extra>",
        legendrank=400, **dyn[6])
    traces[7] = go.Scatter(name="if the current trend continues: predictive lower edge",
                           legendgroup="projection", **skip, **dyn[7])
    traces[8] = go.Scatter(
        name="if the current trend continues: where counts would fall (90%)", legendgroup="projection",
        showlegend=False, mode="lines", line={"width": 0}, fill="tonexty",
        fillcolor=th.PROJECTION_PREDICTIVE_BAND,
        hovertemplate="if the current trend continues, counts would fall in %{customdata[0]:,.0f} to "
                      "%{customdata[1]:,.0f} (90%)<extra></extra>",
        **dyn[8])
    traces[9] = go.Scatter(name="if the current trend continues: trend lower edge",
                           legendgroup="projection", **skip, **dyn[9])
    traces[10] = go.Scatter(
        name="if the current trend continues: trend, 90% credible interval", legendgroup="projection",
        showlegend=False, mode="lines", line={"width": 0}, fill="tonexty", fillcolor=th.PROJECTION_BAND,
        hoverinfo="skip", **dyn[10])
    traces[11] = go.Scatter(
        name="if the current trend continues (median, 90% intervals)", legendgroup="projection",
        mode="lines", line={"color": th.PROJECTION_LINE, "width": th.LINE_STRONG, "dash": "dash"},
        hovertemplate="if the current trend continues: trend %{y:,.1f} per " + per
                      + " (90% credible interval %{customdata[0]:,.1f} to %{customdata[1]:,.1f})<extra></extra>",
        legendrank=500, **dyn[11])
    traces[12] = go.Scatter(
        name="estimated change date: 90% credible interval", legendgroup="change_dates", showlegend=False,
        yaxis="y2", mode="lines", line={"color": th.CHANGE_DATE_INTERVAL, "width": th.LINE},
        hoverinfo="skip", cliponaxis=False, **dyn[12])
    traces[13] = go.Scatter(
        name="estimated change date (median, 90% interval)", legendgroup="change_dates", yaxis="y2",
        mode="markers+text", textposition="top center", cliponaxis=False,
        textfont={"size": th.SMALL_SIZE, "color": th.INK},
        hovertemplate="estimated change date %{customdata[0]}: %{customdata[1]}"
                      "<br>90% credible interval %{customdata[2]} to %{customdata[3]}<extra></extra>",
        legendrank=800, **dyn[13])

    uirev = f"main|{series.get('name')}|{series.get('start')}|{step}|{len(values)}"
    y_title = f"Count per {per}" + (" (log scale)" if log_y else "")
    xaxis = {"type": "date", "title": {"text": "Date"},
             "hoverformat": "%a %d %b %Y" if step == 1 else "%d %b %Y (mid-week)"}
    if x_range is not None:
        xaxis.update(range=list(x_range), autorange=False)
    yaxis = {"title": {"text": y_title}, "uirevision": f"{uirev}|{'log' if log_y else 'linear'}"}
    if log_y:
        yaxis.update(type="log", tickvals=list(_LOG_TICKS), ticktext=[f"{v:,g}" for v in _LOG_TICKS])
    else:
        yaxis.update(type="linear", rangemode="tozero")
    layout = th.base_layout(
        height=560,
        uirevision=uirev,
        hovermode="x unified",
        barmode="overlay",
        bargap=0,
        margin={"l": 76, "r": 24, "t": 52, "b": 120},
        xaxis=xaxis,
        yaxis=yaxis,
        yaxis2={"overlaying": "y", "range": [0, 1], "visible": False, "fixedrange": True,
                "showgrid": False},
        legend={"orientation": "h", "yref": "container", "y": 0.01, "yanchor": "bottom",
                "x": 0, "xanchor": "left", "traceorder": "normal"},
        annotations=[_status_annotation(snapshot)],
        shapes=_main_shapes(series, snapshot, changepoints, highlight_segment),
    )
    return go.Figure(data=traces, layout=layout)


def main_updates(series, snapshot, changepoints=(), *, highlight_segment=None):
    """What changes in :func:`main_figure` from one snapshot to the next.

    Parameters
    ----------
    series : dict
        The same series the figure was built from.
    snapshot : dict or None
        The new snapshot.
    changepoints : sequence of dict
        The tentative change dates the figure was built with (only their
        count is used, to find the highlight shape's index).
    highlight_segment : int, optional
        As in :func:`main_figure`; when given, the highlight shape
        (``shapes[2k]``) follows the new snapshot's segment span.

    Returns
    -------
    dict
        ``{"trace_count": 14, "traces": {index: {...}}, "annotations":
        {0: status note}, "shapes": {2k: highlight}}`` (``shapes`` only with
        ``highlight_segment``). The counts traces (2, 3) never change.
    """
    dyn = _main_dynamic(series, snapshot)
    out = {
        "trace_count": len(MAIN_TRACES),
        "traces": {i: dyn[i] for i in MAIN_SNAPSHOT_TRACES},
        "annotations": {MAIN_STATUS_ANNOTATION: _status_annotation(snapshot)},
    }
    if highlight_segment is not None:
        k = len(changepoints or ())
        out["shapes"] = {2 * k: _highlight_shape(series, snapshot, highlight_segment)}
    return out


# ------------------------------------------------------------- change dates

def _histogram_parts(series, snapshot):
    hist = (snapshot or {}).get("changepoint_histograms") or {}
    edges = _nums(hist.get("edges_day"))
    counts = hist.get("counts") or []
    return edges, counts


def _bin_word(edges):
    if len(edges) < 2:
        return "bin"
    width = edges[1] - edges[0]
    if abs(width - 1) < 0.05:
        return "day"
    if abs(width - 7) < 0.35:
        return "week"
    return f"{width:.1f}-day bin"


def _changepoint_dynamic(series, snapshot):
    edges, counts = _histogram_parts(series, snapshot)
    cps = (snapshot or {}).get("changepoints") or []
    bars, medians = [], []
    for j, shares in enumerate(counts):
        xs, ys, widths = [], [], []
        for b, share in enumerate(shares):
            share = _num(share)
            if not share or b + 1 >= len(edges) or edges[b] is None or edges[b + 1] is None:
                continue  # empty bins are left out (smaller updates)
            xs.append(day_to_x(series, (edges[b] + edges[b + 1]) / 2.0))
            ys.append(share)
            widths.append((edges[b + 1] - edges[b]) * MS_PER_DAY)
        bars.append({"x": xs, "y": ys, "width": widths})
        cp = cps[j] if j < len(cps) else {}
        med = _num(cp.get("median_day"))
        if med is None:
            medians.append({"x": [], "y": [], "hovertext": []})
            continue
        mx = day_to_x(series, med)
        text = (f"change date {j + 1}: median {_label_date(cp['median_date'])}"
                if cp.get("median_date") else f"change date {j + 1}")
        if cp.get("q05_date") and cp.get("q95_date"):
            text += f"<br>90% credible interval {_label_date(cp['q05_date'])} to {_label_date(cp['q95_date'])}"
        medians.append({"x": [mx, mx], "y": [0, 1], "hovertext": [text, text]})
    return bars, medians


def _default_x_range(series, snapshot):
    step = _interval(series)
    start = _start(series)
    end = start + _dt.timedelta(days=step * len(series.get("values") or []))
    proj = (snapshot or {}).get("projection") or {}
    if proj.get("dates"):
        end = max(end, _parse_date(proj["dates"][-1]) + _dt.timedelta(days=step))
    return [_fmt_x(start), _fmt_x(end)]


def changepoint_figure(series, snapshot, *, x_range=None, highlight_segment=None):
    """Posterior distribution of each change date on a date axis matching the main chart.

    Parameters
    ----------
    series : dict
        ``Series.to_dict()``.
    snapshot : dict or None
        Engine snapshot with ``changepoint_histograms`` (shares of draws per
        bin, bin edges in days from the start) and ``changepoints``.
    x_range : [str, str], optional
        Date range of the x axis; by default the series plus the projection,
        as on the main chart.
    highlight_segment : int, optional
        1-based segment to shade.

    Returns
    -------
    plotly.graph_objects.Figure
        Traces: one bar trace per change date ("change date 1", ...), then one
        median marker line per change date (on a hidden 0-1 axis). An empty
        panel with a message before the first draws or with one segment.
    """
    if not _has_fit(snapshot):
        return empty_figure("Change-date distributions appear once the first draws arrive.")
    edges, counts = _histogram_parts(series, snapshot)
    if not counts:
        return empty_figure("One segment: there are no change dates to estimate.")
    bars, medians = _changepoint_dynamic(series, snapshot)
    word = _bin_word(edges)
    traces = []
    for j, b in enumerate(bars):
        traces.append(go.Bar(
            name=f"change date {j + 1}", legendgroup=f"cp{j}",
            marker={"color": _change_colour(j), "opacity": 0.7, "line": {"width": 0}},
            hovertemplate=f"change date {j + 1}: %{{y:.1%}} of draws in the {word} around "
                          "%{x|%d %b %Y}<extra></extra>",
            **b))
    for j, m in enumerate(medians):
        traces.append(go.Scatter(
            name=f"change date {j + 1}: median", legendgroup=f"cp{j}", showlegend=False, yaxis="y2",
            mode="lines+markers", line={"color": _change_colour(j), "width": th.LINE_THIN, "dash": "dot"},
            marker={"symbol": "diamond", "size": [0, 12], "color": _change_colour(j),
                    "line": {"color": th.INK, "width": 1}},
            hoverinfo="text", cliponaxis=False, **m))
    note = status_note(snapshot)
    title = "Change dates: where the draws put them"
    layout = th.base_layout(
        height=300,
        title={"text": title + (f"  <span style='font-size:{th.SMALL_SIZE}px'>({note})</span>" if note else "")},
        uirevision=f"changes|{series.get('name')}|{series.get('start')}",
        barmode="overlay", bargap=0,
        margin={"l": 76, "r": 24, "t": 48, "b": 48},
        xaxis={"type": "date", "title": {"text": "Date"}, "range": list(x_range or _default_x_range(series, snapshot)),
               "autorange": False},
        yaxis={"title": {"text": f"Share of draws per {word}"}, "tickformat": ".0%", "rangemode": "tozero"},
        yaxis2={"overlaying": "y", "range": [0, 1], "visible": False, "fixedrange": True, "showgrid": False},
        legend={"orientation": "h", "x": 1, "xanchor": "right", "y": 1.0, "yanchor": "bottom"},
        shapes=[_highlight_shape(series, snapshot, highlight_segment)] if highlight_segment is not None else [],
    )
    return go.Figure(data=traces, layout=layout)


def changepoint_updates(series, snapshot):
    """What changes in :func:`changepoint_figure` from one snapshot to the next.

    Parameters
    ----------
    series : dict
    snapshot : dict or None

    Returns
    -------
    dict
        ``{"trace_count": 2*(K-1), "traces": {...}, "title": ...}``;
        ``trace_count`` 0 before the first draws (rebuild then).
    """
    if not _has_fit(snapshot):
        return {"trace_count": 0, "traces": {}}
    bars, medians = _changepoint_dynamic(series, snapshot)
    n = len(bars)
    traces = {j: b for j, b in enumerate(bars)}
    traces.update({n + j: m for j, m in enumerate(medians)})
    note = status_note(snapshot)
    title = "Change dates: where the draws put them"
    return {"trace_count": 2 * n, "traces": traces,
            "title": title + (f"  <span style='font-size:{th.SMALL_SIZE}px'>({note})</span>" if note else "")}


# ------------------------------------------------------------ growth rates

def _time_text(kind, summary):
    """'doubling every 12 days (9–17)' from a doubling/halving summary (days)."""
    med, lo, hi = (_num(summary.get(k)) for k in ("median", "q05", "q95"))
    if med is None:
        return f"no clear {kind}"
    dec = 1 if med < 10 else 0  # one precision for the median and its interval
    text = f"{kind} every {_fmt_days(med, dec)} days"
    if lo is not None and hi is not None:
        return text + f" ({_fmt_days(lo, dec)}–{_fmt_days(hi, dec)})"
    if lo is not None:  # the slow end is unbounded: the interval reaches no doubling/halving
        return text + f" (> {_fmt_days(lo, dec)}, or no {kind})"
    if hi is not None:
        return text + f" (< {_fmt_days(hi, dec)})"
    return text + " (interval unbounded)"


def growth_text(segment):
    """Two lines describing one segment's rate for the analyst.

    Parameters
    ----------
    segment : dict
        One of ``snapshot["segments"]`` (or ``snapshot["current"]``).

    Returns
    -------
    (str, str)
        Doubling or halving time with its 90% interval in days
        ("doubling every 12 days (9–17)"; an unbounded side as
        "(> 25, or no doubling)"), and P(growing) with R when present
        ("P(growing) 97% · R 1.23 (1.18–1.29)").
    """
    if segment.get("doubling_time_days"):
        first = _time_text("doubling", segment["doubling_time_days"])
    elif segment.get("halving_time_days"):
        first = _time_text("halving", segment["halving_time_days"])
    else:
        first = "no clear doubling or halving"
    second = f"P(growing) {_fmt_prob(segment.get('prob_growing'))}"
    rep = segment.get("reproduction_number")
    if rep and _num(rep.get("median")) is not None:
        r = f"R {rep['median']:.2f}"
        if _num(rep.get("q05")) is not None and _num(rep.get("q95")) is not None:
            r += f" ({rep['q05']:.2f}–{rep['q95']:.2f})"
        second += " · " + r
    return first, second


def segment_label(segment, *, with_year=False, last=False):
    """'Segment 2: 14 Mar – 2 May' for one segment.

    Parameters
    ----------
    segment : dict
        One of ``snapshot["segments"]``.
    with_year : bool
        Add the year to both dates.
    last : bool
        The series' last segment: its ``end_date`` is the day after the data
        ends, so the label shows the day before it (the last day counted).

    Returns
    -------
    str
    """
    start = _parse_date(segment["start_date"])
    end = _parse_date(segment["end_date"])
    if last:
        end -= _dt.timedelta(days=1)
    return (f"Segment {segment['index']}: {_label_date(start, with_year)} – "
            f"{_label_date(end, with_year)}")


def _rate_class(lo, hi):
    if lo is not None and lo > 0:
        return "growing", th.GROWING, "triangle-up"
    if hi is not None and hi < 0:
        return "shrinking", th.SHRINKING, "triangle-down"
    return "unclear", th.UNCLEAR, "circle"


def rates_figure(snapshot, *, highlight_segment=None):
    """Growth rate of each segment as % change per day, with its 90% credible interval.

    One row per segment (segment 1 at the top): a horizontal bar spans the
    90% credible interval, a marker shows the median (▲ vermillion: the
    interval is above zero; ▼ blue: below zero; ● grey: it includes zero);
    text beside each row gives the doubling or halving time, P(growing) and
    R when present.

    Parameters
    ----------
    snapshot : dict or None
    highlight_segment : int, optional
        1-based segment to shade and set in bold.

    Returns
    -------
    plotly.graph_objects.Figure
        Trace 0: interval bars, trace 1: medians; both carry
        ``customdata[i] = [segment index]`` (1-based) for click and hover.
    """
    segments = (snapshot or {}).get("segments") or []
    if not segments:
        return empty_figure("Growth rates appear once the first draws arrive.")
    years = set()
    for s in segments:
        years.add(_parse_date(s["start_date"]).year)
        years.add((_parse_date(s["end_date"]) - _dt.timedelta(days=1)).year)
    with_year = len(years) > 1
    n = len(segments)
    rows = list(range(n))
    labels, base, width, med, colours, symbols, custom, hover, notes = [], [], [], [], [], [], [], [], []
    for i, s in enumerate(segments):
        g = s.get("growth_rate_per_day") or {}
        lo, m, hi = _pct_per_day(g.get("q05")), _pct_per_day(g.get("median")), _pct_per_day(g.get("q95"))
        label = segment_label(s, with_year=with_year, last=i == n - 1)
        bold = highlight_segment is not None and s.get("index") == highlight_segment
        labels.append(f"<b>{label}</b>" if bold else label)
        kind, colour, symbol = _rate_class(lo, hi)
        base.append(lo)
        width.append(None if lo is None or hi is None else hi - lo)
        med.append(m)
        colours.append(colour)
        symbols.append(symbol)
        custom.append([s.get("index", i + 1)])
        hover.append(f"{label}<br>growth rate {_fmt_pct(m)}% per day "
                     f"(90% credible interval {_fmt_pct(lo)} to {_fmt_pct(hi)}); {kind}")
        first, second = growth_text(s)
        notes.append({
            "text": f"<b>{first}</b><br>{second}" if bold else f"{first}<br>{second}",
            "xref": "paper", "x": 0.56, "xanchor": "left", "yref": "y", "y": i, "yanchor": "middle",
            "showarrow": False, "align": "left", "font": {"size": th.SMALL_SIZE, "color": th.INK},
        })
    traces = [
        go.Bar(
            name="90% credible interval", orientation="h", y=rows, x=width, base=base, width=0.2,
            marker={"color": [th.rgba(c, 0.55) if c.startswith("#") else c for c in colours],
                    "line": {"color": colours, "width": 1}},
            customdata=custom, hovertext=hover, hoverinfo="text", showlegend=False),
        go.Scatter(
            name="median", y=rows, x=med, mode="markers", customdata=custom, hovertext=hover,
            hoverinfo="text", showlegend=False,
            marker={"symbol": symbols, "size": 16, "color": colours, "line": {"color": th.WHITE, "width": 1.5}}),
    ]
    shapes = [{"type": "line", "xref": "x", "yref": "paper", "x0": 0, "x1": 0, "y0": 0, "y1": 1,
               "line": {"color": th.REFERENCE_LINE, "width": th.LINE}, "layer": "above"}]
    if highlight_segment is not None:
        for i, s in enumerate(segments):
            if s.get("index") == highlight_segment:
                shapes.append({"type": "rect", "xref": "paper", "yref": "y", "x0": 0, "x1": 1,
                               "y0": i - 0.5, "y1": i + 0.5, "fillcolor": th.HIGHLIGHT,
                               "line": {"width": 0}, "layer": "below"})
    note = status_note(snapshot)
    layout = th.base_layout(
        height=110 + 78 * n,
        margin={"l": 20, "r": 16, "t": 40 if note else 24, "b": 96},
        bargap=0,
        xaxis={"domain": [0, 0.52], "title": {"text": "Growth rate (% change per day), 90% credible interval"},
               "rangemode": "tozero", "ticksuffix": "%", "zeroline": False},
        yaxis={"tickvals": rows, "ticktext": labels, "autorange": "reversed", "showgrid": False,
               "ticks": ""},
        annotations=notes + [
            {"text": "zero: no change", "xref": "x", "x": 0, "yref": "paper", "y": 1.0, "yanchor": "bottom",
             "showarrow": False, "font": {"size": th.SMALL_SIZE, "color": th.MUTED_INK}},
            {"text": "▲ growing · ▼ shrinking · ● unclear (interval includes zero). Brackets: 90% credible "
                     "intervals, days.",
             "xref": "paper", "x": 0, "xanchor": "left", "yref": "paper", "y": 0, "yshift": -62,
             "yanchor": "top", "showarrow": False, "align": "left",
             "font": {"size": th.SMALL_SIZE, "color": th.MUTED_INK}},
        ] + ([{"text": note, "xref": "paper", "yref": "paper", "x": 1, "y": 1, "yshift": 14,
               "xanchor": "right", "yanchor": "bottom", "showarrow": False,
               "font": {"size": th.SMALL_SIZE, "color": th.WARNING_TEXT}, "bgcolor": th.WARNING_FILL,
               "bordercolor": th.WARNING_BORDER, "borderwidth": 1}] if note else []),
        shapes=shapes,
        hovermode="closest",
    )
    return go.Figure(data=traces, layout=layout)


# ------------------------------------------------------------------- traces

def _trace_parts(snapshot, parameter_name):
    traces = (snapshot or {}).get("traces") or {}
    names = traces.get("names") or []
    if parameter_name not in names:
        return None
    values = (traces.get("values") or [])[names.index(parameter_name)]
    x = list(traces.get("draw") or traces.get("iteration") or [])
    return [{"x": x, "y": _nums(chain)} for chain in values]


def _trace_title(snapshot, parameter_name):
    diag = (snapshot or {}).get("diagnostics") or {}
    for p in diag.get("parameters") or []:
        if p.get("name") == parameter_name:
            bits = []
            if _num(p.get("rhat")) is not None:
                bits.append(f"R-hat {p['rhat']:.3f}")
            if _num(p.get("ess_bulk")) is not None:
                bits.append(f"bulk ESS {p['ess_bulk']:,.0f}")
            if _num(p.get("ess_tail")) is not None:
                bits.append(f"tail ESS {p['ess_tail']:,.0f}")
            if bits:
                return f"{parameter_name}: " + ", ".join(bits)
    return parameter_name


def _chain_line(c):
    return {"color": th.CHAIN_COLOURS[c % len(th.CHAIN_COLOURS)],
            "dash": th.CHAIN_DASHES[(c // len(th.CHAIN_COLOURS)) % len(th.CHAIN_DASHES)],
            "width": 1.4}


def trace_figure(snapshot, parameter_name):
    """Trace plot: one line per chain of a reported quantity's recent draws.

    Parameters
    ----------
    snapshot : dict or None
        Engine snapshot; ``traces`` holds ``iteration`` (sampling iteration
        after warm-up, possibly thinned), ``names`` and
        ``values[parameter][chain][k]``.
    parameter_name : str
        One of ``snapshot["traces"]["names"]`` (units are in the name, e.g.
        "growth rate 1 (per day)").

    Returns
    -------
    plotly.graph_objects.Figure
        One trace per chain ("chain 1", ...); chains 8 and up repeat the
        colours with the next dash pattern. A note instead while there are
        no traces (warm-up) or the name is unknown.
    """
    parts = _trace_parts(snapshot, parameter_name)
    if parts is None:
        if not snapshot or not snapshot.get("traces"):
            phase = (snapshot or {}).get("phase")
            if phase == "warmup":
                msg = (f"Traces appear once sampling starts (warm-up: iteration "
                       f"{snapshot.get('iteration', 0)} of {snapshot.get('warmup_iterations', '?')}).")
            elif phase == "init":
                msg = "Traces appear once sampling starts (finding starting points)."
            else:
                msg = "Traces appear once sampling starts."
        else:
            msg = f"No trace recorded for \u201c{parameter_name}\u201d."
        return empty_figure(msg)
    traces = [go.Scatter(name=f"chain {c + 1}", mode="lines", line=_chain_line(c),
                         hovertemplate=f"chain {c + 1}, iteration %{{x}}: %{{y:.4g}}<extra></extra>", **p)
              for c, p in enumerate(parts)]
    layout = th.base_layout(
        height=360,
        title={"text": _trace_title(snapshot, parameter_name)},
        uirevision=f"trace|{parameter_name}",
        margin={"l": 76, "r": 24, "t": 48, "b": 56},
        xaxis={"title": {"text": "Sampling iteration (after warm-up)"}},
        yaxis={"title": {"text": parameter_name}},
        legend={"font": {"size": th.SMALL_SIZE}},
        hovermode="closest",
    )
    return go.Figure(data=traces, layout=layout)


def trace_updates(snapshot, parameter_name):
    """What changes in :func:`trace_figure` from one snapshot to the next.

    Returns
    -------
    dict
        ``{"trace_count": chains, "traces": {c: {"x", "y"}}, "title": ...}``;
        ``trace_count`` 0 when there are no traces for the name.
    """
    parts = _trace_parts(snapshot, parameter_name)
    if parts is None:
        return {"trace_count": 0, "traces": {}}
    return {"trace_count": len(parts), "traces": dict(enumerate(parts)),
            "title": _trace_title(snapshot, parameter_name)}


# -------------------------------------------------------------- diagnostics

def _thresholds(diag):
    crit = (diag or {}).get("criterion") or ""
    m_r = re.search(r"R-hat\s*<\s*([0-9.]+)", crit)
    m_e = re.search(r"ESS\s*>=?\s*([0-9.]+)", crit)
    return (float(m_r.group(1)) if m_r else RHAT_LIMIT, float(m_e.group(1)) if m_e else ESS_MIN)


def diagnostics_rows(snapshot):
    """Rows of the convergence table, one per reported quantity.

    Parameters
    ----------
    snapshot : dict or None

    Returns
    -------
    list of dict
        Keys ``parameter``, ``rhat`` (3 decimals), ``ess_bulk``,
        ``ess_tail`` (whole draws; None where not computed) and ``status``:
        "ok", "chains disagree (R-hat ≥ 1.01)", "too few effective draws
        (ESS < 400)" (both joined by "; " when both hold), or "not
        available". Empty before the first convergence check.
    """
    diag = (snapshot or {}).get("diagnostics")
    if not diag:
        return []
    rhat_limit, ess_min = _thresholds(diag)
    rows = []
    for p in diag.get("parameters") or []:
        rhat, bulk, tail = _num(p.get("rhat")), _num(p.get("ess_bulk")), _num(p.get("ess_tail"))
        problems = []
        if rhat is None or bulk is None or tail is None:
            problems.append("not available")
        else:
            if rhat >= rhat_limit:
                problems.append(f"chains disagree (R-hat ≥ {rhat_limit:g})")
            if min(bulk, tail) < ess_min:
                problems.append(f"too few effective draws (ESS < {ess_min:g})")
        rows.append({
            "parameter": p.get("name"),
            "rhat": None if rhat is None else round(rhat, 3),
            "ess_bulk": None if bulk is None else int(round(bulk)),
            "ess_tail": None if tail is None else int(round(tail)),
            "status": "; ".join(problems) if problems else "ok",
        })
    return rows


def diagnostics_summary(snapshot):
    """One sentence on convergence for the panel above the table.

    Parameters
    ----------
    snapshot : dict or None

    Returns
    -------
    str
        E.g. "Converged: max R-hat 1.007, min ESS 1,410 (criterion: ...)." or
        "Not yet converged: max R-hat 1.061 (needs < 1.01), min ESS 140
        (needs ≥ 400); still sampling (99 draws per chain so far)."
    """
    if not snapshot:
        return "No fit yet."
    phase = snapshot.get("phase")
    diag = snapshot.get("diagnostics")
    if phase == "init":
        return "Not yet converged: finding starting points."
    if phase == "warmup":
        return (f"Not yet converged: warm-up, iteration {snapshot.get('iteration', 0)} of "
                f"{snapshot.get('warmup_iterations', '?')}; convergence is checked once sampling starts.")
    draws = snapshot.get("draws_per_chain")
    if not diag:
        if phase == "done":
            return "Not converged: the run ended before any convergence check. Do not report."
        return f"Not yet converged: still sampling ({draws} draws per chain so far), no check yet."
    rhat_limit, ess_min = _thresholds(diag)
    rhat = _num(diag.get("rhat_max"))
    ess = [v for v in (_num(diag.get("ess_bulk_min")), _num(diag.get("ess_tail_min"))) if v is not None]
    ess_min_seen = min(ess) if ess else None
    r_txt = "max R-hat –" if rhat is None else f"max R-hat {rhat:.3f}"
    e_txt = "min ESS –" if ess_min_seen is None else f"min ESS {ess_min_seen:,.0f}"
    crit = diag.get("criterion") or f"max R-hat < {rhat_limit:g} and min bulk and tail ESS >= {ess_min:g}"
    if phase == "done":
        if diag.get("converged"):
            return f"Converged: {r_txt}, {e_txt} (criterion: {crit})."
        why = {"stopped": "stopped on request",
               "unconverged": "the time budget or draw limit was reached"}.get(snapshot.get("status"),
                                                                               "the run ended")
        return f"Not converged: {r_txt}, {e_txt} (criterion: {crit}); {why}. Do not report."
    if diag.get("converged"):
        return (f"Criterion met ({r_txt}, {e_txt}); still sampling to reach "
                f"{snapshot.get('draws_requested', '?')} draws per chain ({draws} so far).")
    return (f"Not yet converged: {r_txt} (needs < {rhat_limit:g}), {e_txt} (needs ≥ {ess_min:g}); "
            f"still sampling ({draws} draws per chain so far).")


# ----------------------------------------------------------------- weekday

def weekday_figure(snapshot):
    """Day-of-week reporting factors with 90% credible intervals.

    Parameters
    ----------
    snapshot : dict or None
        ``weekday``: list of ``{day, median, q05, q95}`` multiplicative
        factors (geometric mean 1 over the week), or None when the model has
        no weekday effect.

    Returns
    -------
    plotly.graph_objects.Figure
        One trace (medians with interval error bars) and a reference line at
        1; an empty-state panel when the effect was not fitted.
    """
    if not _has_fit(snapshot) or "weekday" not in snapshot:
        return empty_figure("Day-of-week factors appear once the first draws arrive.")
    days = snapshot.get("weekday")
    if not days:
        return empty_figure("Weekday effect not fitted (weekly series or switched off)")
    names = [str(d.get("day")) for d in days]
    short = [n[:3] for n in names]
    med = [_num(d.get("median")) for d in days]
    lo = [_num(d.get("q05")) for d in days]
    hi = [_num(d.get("q95")) for d in days]
    up = [None if h is None or m is None else h - m for h, m in zip(hi, med)]
    down = [None if m is None or low is None else m - low for m, low in zip(med, lo)]
    hover = [f"{n}: counts × {m:.2f} (90% credible interval {a:.2f} to {b:.2f})"
             if None not in (m, a, b) else n for n, m, a, b in zip(names, med, lo, hi)]
    trace = go.Scatter(
        name="day-of-week factor", x=short, y=med, mode="markers",
        marker={"color": th.BLUE, "size": 13, "symbol": "square"},
        error_y={"type": "data", "symmetric": False, "array": up, "arrayminus": down,
                 "color": th.BLUE, "thickness": 2.5, "width": 8},
        hovertext=hover, hoverinfo="text", showlegend=False)
    note = status_note(snapshot)
    layout = th.base_layout(
        height=340,
        margin={"l": 76, "r": 24, "t": 40 if note else 20, "b": 56},
        xaxis={"title": {"text": "Day of week"}, "type": "category", "showgrid": False},
        yaxis={"title": {"text": "Factor on counts (1 = average day)"}, "tickformat": ".2f"},
        shapes=[{"type": "line", "xref": "paper", "x0": 0, "x1": 1, "yref": "y", "y0": 1, "y1": 1,
                 "line": {"color": th.REFERENCE_LINE, "width": th.LINE_THIN, "dash": "dash"},
                 "layer": "below"}],
        annotations=[{"text": "no weekday effect", "xref": "paper", "x": 1, "xanchor": "right", "yref": "y",
                      "y": 1, "yanchor": "bottom", "showarrow": False,
                      "font": {"size": th.SMALL_SIZE, "color": th.MUTED_INK}}]
        + ([{"text": note, "xref": "paper", "yref": "paper", "x": 1, "y": 1, "yshift": 8, "xanchor": "right",
             "yanchor": "bottom", "showarrow": False, "font": {"size": th.SMALL_SIZE, "color": th.WARNING_TEXT},
             "bgcolor": th.WARNING_FILL, "bordercolor": th.WARNING_BORDER, "borderwidth": 1}] if note else []),
        hovermode="closest",
    )
    return go.Figure(data=[trace], layout=layout)


# --------------------------------------------------------------- residuals

def _checks_interval(dates):
    if len(dates) >= 2:
        return max(1, (_parse_date(dates[1]) - _parse_date(dates[0])).days)
    return 1


def _residual_title(checks):
    cov = _num(checks.get("coverage_90"))
    if cov is None:
        return "90% predictive intervals: coverage not available"
    return f"90% predictive intervals cover {100 * cov:.0f}% of values"


def _residual_dynamic(snapshot):
    checks = snapshot.get("checks") or {}
    dates = checks.get("dates") or []
    step = _checks_interval(dates)
    dyn = {0: {"x": _band_x(dates, step), "y": _nums(checks.get("pearson")),
               "customdata": [_day_name(d) if step == 1 else f"week of {_day_name(d)}" for d in dates]}}
    by_day = checks.get("residual_by_weekday")
    if by_day:
        dyn[1] = {"x": [str(d.get("day"))[:3] for d in by_day], "y": [_num(d.get("mean")) for d in by_day],
                  "customdata": [[str(d.get("day")), d.get("n")] for d in by_day]}
    return dyn, _residual_title(checks)


def residual_figure(snapshot):
    """Pearson residuals of the posterior predictive check, over time and by weekday.

    Parameters
    ----------
    snapshot : dict or None
        ``checks``: ``coverage_90`` (share of values inside their 90%
        predictive interval), ``dates``, ``pearson`` (one residual per value,
        None where missing) and ``residual_by_weekday`` (daily series) or
        None.

    Returns
    -------
    plotly.graph_objects.Figure
        Trace 0: residuals over time (points); for daily series trace 1: mean
        residual by day of week (bars, right-hand panel). The title states
        the coverage ("90% predictive intervals cover 91% of values").
    """
    if not snapshot or not snapshot.get("checks"):
        return empty_figure("The model check appears once the first draws arrive.")
    dyn, title = _residual_dynamic(snapshot)
    daily = 1 in dyn
    if daily:
        fig = make_subplots(rows=1, cols=2, column_widths=[0.74, 0.26], horizontal_spacing=0.09,
                            subplot_titles=("Over time", "Mean by day of week"))
    else:
        fig = go.Figure()
    points = go.Scatter(
        name="Pearson residual", mode="markers", marker={"color": th.BLUE, "size": 6, "opacity": 0.8},
        hovertemplate="%{customdata}: residual %{y:.2f}<extra></extra>", showlegend=False, **dyn[0])
    fig.add_trace(points, **({"row": 1, "col": 1} if daily else {}))
    if daily:
        fig.add_trace(go.Bar(
            name="mean residual by day of week", marker={"color": th.SKY_BLUE, "line": {"color": th.BLUE,
                                                                                      "width": 1}},
            hovertemplate="%{customdata[0]}: mean residual %{y:.3f} over %{customdata[1]} days<extra></extra>",
            showlegend=False, **dyn[1]), row=1, col=1 + 1)
    ref = {"type": "line", "xref": "x domain", "x0": 0, "x1": 1, "yref": "y", "layer": "below"}
    shapes = [dict(ref, y0=0, y1=0, line={"color": th.REFERENCE_LINE, "width": th.LINE_THIN})]
    shapes += [dict(ref, y0=v, y1=v, line={"color": th.MUTED_INK, "width": 1, "dash": "dot"}) for v in (-2, 2)]
    if daily:
        shapes.append({"type": "line", "xref": "x2 domain", "x0": 0, "x1": 1, "yref": "y2", "y0": 0, "y1": 0,
                       "line": {"color": th.REFERENCE_LINE, "width": th.LINE_THIN}, "layer": "above"})
    layout = th.base_layout(
        height=360,
        title={"text": title, "subtitle": {
            "text": "About 90% is expected. Dotted lines at ±2: values beyond them surprised the model.",
            "font": {"size": th.SMALL_SIZE, "color": th.MUTED_INK}}},
        margin={"l": 76, "r": 24, "t": 88, "b": 56},
        xaxis={"type": "date", "title": {"text": "Date"}},
        yaxis={"title": {"text": "Pearson residual (obs − pred) / sd"}},
        shapes=shapes,
        hovermode="closest",
        uirevision="residuals",
    )
    if daily:
        layout.update(
            xaxis2=th.axis_style(type="category", title={"text": "Day of week"}, showgrid=False),
            yaxis2=th.axis_style(title={"text": "Mean residual"}, tickformat=".2f"),
        )
    fig.update_layout(layout)
    if daily:  # subplot titles are annotations made by make_subplots; restyle them
        fig.update_annotations(font={"size": th.SMALL_SIZE, "color": th.MUTED_INK})
    return fig


def residual_updates(snapshot):
    """What changes in :func:`residual_figure` from one snapshot to the next.

    Returns
    -------
    dict
        ``{"trace_count": 1 or 2, "traces": {...}, "title": ...}``;
        ``trace_count`` 0 before the first check (rebuild then).
    """
    if not snapshot or not snapshot.get("checks"):
        return {"trace_count": 0, "traces": {}}
    dyn, title = _residual_dynamic(snapshot)
    return {"trace_count": len(dyn), "traces": dyn, "title": title}
