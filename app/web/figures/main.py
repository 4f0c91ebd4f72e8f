"""The main chart: counts with the fitted trend, its intervals, the projection and the change dates.

Time placement
--------------
Value ``t`` of a series counts the interval ``[start + t*I, start + (t+1)*I)``
(``I`` = ``interval_days``). Bars, points and bands are drawn at the interval's
midpoint with the interval's full width, so a change date at day offset
``d`` (drawn at ``start + d`` days) falls on the bar of the interval that holds
it, for daily and weekly series alike. :func:`day_to_x` and :func:`x_to_day`
convert between day offsets and the axis' date strings; a drag handler uses
:func:`x_to_day` on ``relayoutData['shapes[i].x0']``.
"""

from __future__ import annotations

import datetime as _dt

import plotly.graph_objects as go

from .. import theme as th
from .common import (MS_PER_DAY, NO_FIT_NOTE, band_x, change_colour, day_to_x, fmt_x, highlight_shape,
                     interval_of, label_date, nums, num, series_start, status_note, value_label)

#: Trace order of :func:`main_figure` (fixed whatever the snapshot).
MAIN_TRACES = (
    "predictive_low",  # 0  90% predictive interval, lower edge (no legend)
    "predictive_high",  # 1  upper edge, filled down to 0
    "counts",  # 2  reported counts (bars or points)
    "average_7day",  # 3  7-day centred average (empty for weekly series)
    "trend_low",  # 4  trend 90% interval, lower edge
    "trend_high",  # 5  upper edge, filled down to 4
    "trend_median",  # 6  trend posterior median
    "projection_predictive_low",  # 7  if the trend continues: predictive lower edge
    "projection_predictive_high",  # 8  upper edge, filled down to 7
    "projection_low",  # 9  if the trend continues: trend 90% interval, lower
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
    vals = nums(values)
    out = []
    n = len(vals)
    for t in range(n):
        window = [vals[i] for i in range(t - 3, t + 4) if 0 <= i < n and vals[i] is not None]
        out.append(sum(window) / len(window) if len(window) >= 4 else None)
    return out


def _series_x(series):
    start = series_start(series)
    step = interval_of(series)
    return [fmt_x(start + _dt.timedelta(days=step * (t + 0.5))) for t in range(len(series.get("values") or []))]


def _series_labels(series):
    start = series_start(series)
    step = interval_of(series)
    return [value_label(start + _dt.timedelta(days=step * t), step) for t in range(len(series.get("values") or []))]


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


def _main_dynamic(series, snapshot):
    """Snapshot-dependent properties of main_figure's traces, by index."""
    step = interval_of(series)
    dyn = {}
    band = (snapshot or {}).get("band") or {}
    bx = band_x(band.get("dates") or [], step)
    t05, t50, t95 = (nums(band.get(k)) for k in ("trend_q05", "trend_q50", "trend_q95"))
    p05, p95 = nums(band.get("predictive_q05")), nums(band.get("predictive_q95"))
    if not bx:
        t05 = t50 = t95 = p05 = p95 = []
    dyn[0] = {"x": bx, "y": p05}
    dyn[1] = {"x": bx, "y": p95, "customdata": [[a, b] for a, b in zip(p05, p95)]}
    dyn[4] = {"x": bx, "y": t05}
    dyn[5] = {"x": bx, "y": t95}
    dyn[6] = {"x": bx, "y": t50, "customdata": [[a, b] for a, b in zip(t05, t95)]}

    proj = (snapshot or {}).get("projection") or {}
    px = band_x(proj.get("dates") or [], step)
    q05, q95 = nums(proj.get("q05")), nums(proj.get("q95"))
    r05, r50, r95 = (nums(proj.get(k)) for k in ("trend_q05", "trend_q50", "trend_q95"))
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
        med, lo, hi = (num(cp.get(k)) for k in ("median_day", "q05_day", "q95_day"))
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
            label_date(cp["median_date"]) if cp.get("median_date") else "–",
            label_date(cp["q05_date"]) if cp.get("q05_date") else "–",
            label_date(cp["q95_date"]) if cp.get("q95_date") else "–",
        ])
        colours.append(change_colour(j))
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
        spread = abs(num(cp.get("spread_days")) or 0.0)
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
        shapes.append(highlight_shape(series, snapshot, highlight_segment))
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
    step = interval_of(series)
    per = "day" if step == 1 else "week"
    values = nums(series.get("values"))
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
        name="trend: 90% interval", legendgroup="trend_band", mode="lines", line={"width": 0},
        fill="tonexty", fillcolor=th.TREND_BAND, hoverinfo="skip", legendrank=410, **dyn[5])
    traces[6] = go.Scatter(
        name="trend: posterior median", mode="lines", line={"color": th.TREND_LINE, "width": th.LINE_STRONG},
        hovertemplate="trend: %{y:,.1f} per " + per
                      + " (90% interval %{customdata[0]:,.1f} to %{customdata[1]:,.1f})<extra></extra>",
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
        name="if the current trend continues: trend, 90% interval", legendgroup="projection",
        showlegend=False, mode="lines", line={"width": 0}, fill="tonexty", fillcolor=th.PROJECTION_BAND,
        hoverinfo="skip", **dyn[10])
    traces[11] = go.Scatter(
        name="if the current trend continues (median, 90% intervals)", legendgroup="projection",
        mode="lines", line={"color": th.PROJECTION_LINE, "width": th.LINE_STRONG, "dash": "dash"},
        hovertemplate="if the current trend continues: trend %{y:,.1f} per " + per
                      + " (90% interval %{customdata[0]:,.1f} to %{customdata[1]:,.1f})<extra></extra>",
        legendrank=500, **dyn[11])
    traces[12] = go.Scatter(
        name="estimated change date: 90% interval", legendgroup="change_dates", showlegend=False,
        yaxis="y2", mode="lines", line={"color": th.CHANGE_DATE_INTERVAL, "width": th.LINE},
        hoverinfo="skip", cliponaxis=False, **dyn[12])
    traces[13] = go.Scatter(
        name="estimated change date (median, 90% interval)", legendgroup="change_dates", yaxis="y2",
        mode="markers+text", textposition="top center", cliponaxis=False,
        textfont={"size": th.SMALL_SIZE, "color": th.INK},
        hovertemplate="estimated change date %{customdata[0]}: %{customdata[1]}"
                      "<br>90% interval %{customdata[2]} to %{customdata[3]}<extra></extra>",
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
        out["shapes"] = {2 * k: highlight_shape(series, snapshot, highlight_segment)}
    return out
