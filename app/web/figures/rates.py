"""The growth-rate panel: one row per segment, built to read in a narrow column.

Each row stacks, from the top: the segment's label ("▲ Segment 1: 5 Jan –
19 Mar"), two lines of text (doubling or halving time; P(growing) and R),
then the 90% interval of the growth rate as a bar with the median
marked, across the panel's full width. Nothing sits beside the interval, so
the text never competes with the plot for width, and every line is short
enough for a 360 px column.

Geometry: row ``i`` (0 = segment 1, at the top) spans ``y`` from ``i - 0.5``
to ``i + 0.5`` on a reversed axis of fixed range, and the figure's height is
``ROW_PX`` per row plus the margins, so one unit of ``y`` is ``ROW_PX``
pixels whatever the number of segments. An opaque strip covers the text part
of each row, which keeps grid lines and the zero line to the interval bars.
"""

from __future__ import annotations

import datetime as _dt
import math

import plotly.graph_objects as go

from .. import theme as th
from bendline.inference.wording import INTERVAL, direction_of, fmt_pct, fmt_prob, growth_block, time_text, unit_of

from .common import empty_figure, label_date, num, parse_date, status_badge, status_note

#: Height of one segment's row (px): label, two lines of text, the interval bar.
ROW_PX = 104
_TEXT_PX = 62  # the text part at the top of a row
_BAR_PX = 14  # thickness of an interval bar
_LABEL_SHIFT = 6  # px from the row's top to the label
_DETAIL_SHIFT = 27  # px from the row's top to the detail lines
_BOTTOM_PX = 100  # x axis, its title and the two-line key
_KEY_SHIFT = 56  # px below the plot area to the key

_SYMBOL_TEXT = {"triangle-up": "▲", "triangle-down": "▼", "circle": "●"}
KEY_TEXT = "▲ growing · ▼ falling · ● flat or uncertain<br>Bars: 90% intervals."


def growth_text(segment):
    """Two lines describing one segment's rate for the analyst.

    Parameters
    ----------
    segment : dict
        One of ``snapshot["segments"]`` (or ``snapshot["current"]``).

    Returns
    -------
    (str, str)
        Doubling or halving time with its 90% interval in days, worded as
        everywhere else (:func:`inference.wording.time_text`), and P(growing) with R when present
        ("P(growing) 97% · R 1.23 (1.18–1.29)").
    """
    if segment.get("doubling_time_days"):
        first = time_text("doubling", segment["doubling_time_days"])
    elif segment.get("halving_time_days"):
        first = time_text("halving", segment["halving_time_days"])
    else:
        first = "no clear doubling or halving"
    second = f"P(growing) {fmt_prob(segment.get('prob_growing'))}"
    rep = segment.get("reproduction_number")
    if rep and num(rep.get("median")) is not None:
        r = f"R {rep['median']:.2f}"
        if num(rep.get("q05")) is not None and num(rep.get("q95")) is not None:
            r += f" ({rep['q05']:.2f}–{rep['q95']:.2f})"
        second += " · " + r
    return first, second


def segment_last_day(segment, *, last=False, series_end=None, interval_days=1):
    """The last calendar day a segment covers (``datetime``).

    Read from ``end_day`` when present (the day holding the segment's end,
    or the series' last day), so it is right for every engine version; else
    from ``end_date``, where older engines gave the last segment the day
    after the data: then ``series_end`` (the last value's date) fixes it, or
    failing that one day is taken off.
    """
    start = parse_date(segment["start_date"])
    start_day, end_day = num(segment.get("start_day")), num(segment.get("end_day"))
    if start_day is not None and end_day is not None:
        return start + _dt.timedelta(days=math.floor(end_day - 1e-9) - math.floor(start_day))
    end = parse_date(segment["end_date"])
    if last and series_end:
        return min(end, parse_date(series_end) + _dt.timedelta(days=interval_days - 1))
    return end - _dt.timedelta(days=1) if last else end


def segment_label(segment, *, with_year=False, last=False, series_end=None, interval_days=1):
    """'Segment 2: 14 Mar – 2 May' for one segment (both days included).

    Parameters
    ----------
    segment : dict
        One of ``snapshot["segments"]``.
    with_year : bool
        Add the year to both dates.
    last : bool
        The series' last segment (see :func:`segment_last_day`).
    series_end : str, optional
        The snapshot's ``series_end`` (ISO date of the last value).
    interval_days : int
        Days per value.

    Returns
    -------
    str
    """
    start = parse_date(segment["start_date"])
    end = segment_last_day(segment, last=last, series_end=series_end, interval_days=interval_days)
    return f"Segment {segment['index']}: {label_date(start, with_year)} – {label_date(end, with_year)}"


def _rate_class(segment):
    """(direction word, colour, marker) from the engine's direction of a segment."""
    how = direction_of(segment)
    if how == "growing":
        return how, th.GROWING, "triangle-up"
    if how == "falling":
        return how, th.SHRINKING, "triangle-down"
    return how, th.UNCLEAR, "circle"


def _row_text(i, text, shift, size, name):
    return {"name": name, "text": text, "xref": "paper", "x": 0, "xanchor": "left", "yref": "y",
            "y": i - 0.5, "yanchor": "top", "yshift": -shift, "showarrow": False, "align": "left",
            "font": {"size": size, "color": th.INK}}


def rates_figure(snapshot, *, highlight_segment=None):
    """Growth rate of each segment as % change per day (per week for weekly series), with its 90% interval.

    One row per segment (segment 1 at the top): a label line, the doubling
    or halving time, P(growing) and R when present, then a horizontal bar
    spanning the 90% interval with a marker at the median, shaped and
    coloured by the engine's direction (▲ vermillion: growing; ▼ blue:
    falling; ● grey: flat or uncertain). See the module's docstring for the
    geometry.

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
        Annotations named "segment k" (label) and "segment k detail" (the
        two lines of text), "key", and "status" while not final.
    """
    segments = (snapshot or {}).get("segments") or []
    if not segments:
        return empty_figure("Growth rates appear once the first draws arrive.")
    n = len(segments)
    where = {"series_end": snapshot.get("series_end"), "interval_days": int(snapshot.get("interval_days") or 1)}
    years = {parse_date(s["start_date"]).year for s in segments}
    years |= {segment_last_day(s, last=i == n - 1, **where).year for i, s in enumerate(segments)}
    with_year = len(years) > 1
    bar_y = [i - 0.5 + (_TEXT_PX + (ROW_PX - _TEXT_PX) / 2) / ROW_PX for i in range(n)]
    base, width, med, colours, symbols, custom, hover, notes, covers = [], [], [], [], [], [], [], [], []
    unit = unit_of(snapshot)
    for i, s in enumerate(segments):
        g = growth_block(s, unit)
        lo, m, hi = num(g.get("q05")), num(g.get("median")), num(g.get("q95"))
        label = segment_label(s, with_year=with_year, last=i == n - 1, **where)
        bold = highlight_segment is not None and s.get("index") == highlight_segment
        kind, colour, symbol = _rate_class(s)
        base.append(lo)
        width.append(None if lo is None or hi is None else hi - lo)
        med.append(m)
        colours.append(colour)
        symbols.append(symbol)
        custom.append([s.get("index", i + 1)])
        hover.append(f"{label}<br>growth rate {fmt_pct(m)} per {unit} "
                     f"({INTERVAL} {fmt_pct(lo)} to {fmt_pct(hi)}); {kind}")
        first, second = growth_text(s)
        fill = th.HIGHLIGHT_SOLID if bold else th.WHITE
        notes.append(_row_text(
            i, f"<span style='color:{colour}'>{_SYMBOL_TEXT[symbol]}</span> <b>{label}</b>",
            _LABEL_SHIFT, th.FONT_SIZE, f"segment {s.get('index', i + 1)}"))
        notes.append(_row_text(i, f"<b>{first}</b><br>{second}" if bold else f"{first}<br>{second}",
                               _DETAIL_SHIFT, th.TICK_SIZE, f"segment {s.get('index', i + 1)} detail"))
        covers.append({"type": "rect", "name": f"segment {s.get('index', i + 1)} text", "xref": "paper",
                       "x0": 0, "x1": 1, "yref": "y", "y0": i - 0.5, "y1": i - 0.5 + _TEXT_PX / ROW_PX,
                       "fillcolor": fill, "line": {"width": 0}, "layer": "above"})
    traces = [
        go.Bar(
            name=INTERVAL, orientation="h", y=bar_y, x=width, base=base,
            width=_BAR_PX / ROW_PX,
            marker={"color": [th.rgba(c, 0.55) for c in colours], "line": {"color": colours, "width": 1}},
            customdata=custom, hovertext=hover, hoverinfo="text", showlegend=False),
        go.Scatter(
            name="median", y=bar_y, x=med, mode="markers", customdata=custom, hovertext=hover,
            hoverinfo="text", showlegend=False, cliponaxis=False,
            marker={"symbol": symbols, "size": 17, "color": colours, "line": {"color": th.WHITE, "width": 1.5}}),
    ]
    shapes = []
    if highlight_segment is not None:
        for i, s in enumerate(segments):
            if s.get("index") == highlight_segment:
                shapes.append({"type": "rect", "name": "highlighted segment", "xref": "paper", "yref": "y",
                               "x0": 0, "x1": 1, "y0": i - 0.5, "y1": i + 0.5, "fillcolor": th.HIGHLIGHT,
                               "line": {"width": 0}, "layer": "below"})
    shapes.append({"type": "line", "name": "zero: no change", "xref": "x", "yref": "paper", "x0": 0, "x1": 0,
                   "y0": 0, "y1": 1, "line": {"color": th.REFERENCE_LINE, "width": th.LINE}, "layer": "above"})
    shapes += covers  # drawn last: they hide the grid and the zero line behind the text
    note = status_note(snapshot)
    top = 34 if note else 6
    key = {"name": "key", "text": KEY_TEXT, "xref": "paper", "x": 0, "xanchor": "left", "yref": "paper",
           "y": 0, "yshift": -_KEY_SHIFT, "yanchor": "top", "showarrow": False, "align": "left",
           "font": {"size": th.SMALL_SIZE, "color": th.MUTED_INK}}
    layout = th.base_layout(
        height=top + _BOTTOM_PX + ROW_PX * n,
        margin={"l": 16, "r": 16, "t": top, "b": _BOTTOM_PX},
        bargap=0,
        xaxis={"title": {"text": f"Growth rate (% change per {unit})"}, "rangemode": "tozero", "ticksuffix": "%",
               "zeroline": False, "fixedrange": True},
        yaxis={"range": [n - 0.5, -0.5], "autorange": False, "visible": False, "fixedrange": True,
               "showgrid": False},
        annotations=notes + [key] + ([status_badge(note)] if note else []),
        shapes=shapes,
        hovermode="closest",
    )
    return go.Figure(data=traces, layout=layout)
