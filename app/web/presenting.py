"""Figures for presenting: the dashboard's builders, relabelled and enlarged.

Pure post-processing of figures from :mod:`app.web.figures` (which stay the
single source of every trace): :func:`label_projection` shades the projected
period and labels it "if the current trend continues"; :func:`large_main` and
:func:`large_rates` set the larger type a meeting room needs. Nothing here
computes a statistic.
"""

from __future__ import annotations

import datetime as _dt

import plotly.graph_objects as go

from . import theme as th

PROJECTION_LABEL = "if the current trend continues (not a forecast)"
#: Type sizes of the briefing view's main chart (px).
BRIEF_FONT = 19
BRIEF_TICK = 18
BRIEF_LEGEND = 16
BRIEF_NOTE = 20
#: How much the segment panel is enlarged in the briefing view.
BRIEF_RATES_SCALE = 1.3


def _end_of(date_iso, days):
    d = _dt.date.fromisoformat(date_iso[:10]) + _dt.timedelta(days=days)
    return d.isoformat()


def label_projection(fig, view, *, font_size=None):
    """Shade the projected period and label it "if the current trend continues".

    Parameters
    ----------
    fig : plotly.graph_objects.Figure
        From :func:`app.web.figures.main_figure`.
    view : dict or None
        The snapshot or result view the figure was drawn from.
    font_size : int, optional

    Returns
    -------
    plotly.graph_objects.Figure
        A new figure; unchanged (copied) when there is no projection.
    """
    out = go.Figure(fig)
    dates = ((view or {}).get("projection") or {}).get("dates") or []
    if not dates:
        return out
    step = int((view or {}).get("interval_days") or 1)
    x0, x1 = dates[0][:10], _end_of(dates[-1], step)
    out.add_shape(type="rect", name="projected period", xref="x", yref="paper", x0=x0, x1=x1, y0=0, y1=1,
                  fillcolor=th.rgba(th.BLUE, 0.06), line={"width": 0}, layer="below", editable=False)
    out.add_annotation(name="projection label", text=PROJECTION_LABEL, xref="x", yref="paper", x=x1, y=1,
                       xanchor="right", yanchor="bottom", yshift=6, showarrow=False, align="right",
                       font={"size": font_size or th.SMALL_SIZE, "color": th.INK},
                       bgcolor="rgba(255,255,255,0.9)", bordercolor=th.PROJECTION_LINE, borderwidth=1,
                       borderpad=3)
    return out


def type_scale(viewport):
    """How much larger than the base sizes the briefing's chart type should be for a window.

    1 at 1600x900; 1.2 on a 1920x1080 projector; 0.85 at most smaller
    (1280x800 laptops), 1.35 at most larger (4K screens).
    """
    try:
        w, h = float(viewport["w"]), float(viewport["h"])
    except (TypeError, KeyError, ValueError):
        return 1.0
    if w <= 0 or h <= 0:
        return 1.0
    return max(0.85, min(1.35, min(w / 1600.0, h / 900.0)))


def large_main(fig, scale=1.0):
    """The main chart with presentation type (times ``scale``), sized by its container (no fixed height)."""
    out = go.Figure(fig)

    def s(v):
        return round(v * scale)

    axis = {"tickfont": {"size": s(BRIEF_TICK)}, "title": {"font": {"size": s(BRIEF_FONT)}}}
    out.update_layout(
        height=None, autosize=True,
        font={"size": s(BRIEF_FONT)},
        xaxis=dict(axis, title={"text": None}),
        yaxis=axis,
        legend={"font": {"size": s(BRIEF_LEGEND)}},
        hoverlabel={"font": {"size": s(BRIEF_TICK)}},
        margin={"l": s(90), "r": 28, "t": s(80), "b": s(110)},
    )
    for ann in out.layout.annotations:
        ann.font.size = s(BRIEF_NOTE) if ann.name == "status" else s(BRIEF_LEGEND)
        if ann.name == "status":
            ann.yshift = s(24)  # clear of the change-date numbers above the plot
    for trace in out.data:
        if trace.name and trace.name.startswith("estimated change date (median"):
            trace.textfont.size = s(BRIEF_LEGEND)
            if trace.marker is not None:
                trace.marker.size = s(19)
    return out


def large_rates(fig, scale=BRIEF_RATES_SCALE):
    """The segment growth-rate panel enlarged by ``scale`` (type, rows and margins alike).

    The panel's rows are a fixed number of pixels (see
    :mod:`app.web.figures.rates`), so its height, margins, text offsets and
    type all grow together and the rows keep their layout.
    """
    out = go.Figure(fig)
    lay = out.layout

    def s(v):
        return None if v is None else round(v * scale)

    if lay.height:
        lay.height = s(lay.height)
    if lay.margin:
        lay.margin.update(l=s(lay.margin.l), r=s(lay.margin.r), t=s(lay.margin.t), b=s(lay.margin.b))
    lay.font.size = s(lay.font.size or th.FONT_SIZE)
    lay.xaxis.tickfont.size = s(lay.xaxis.tickfont.size or th.TICK_SIZE)
    if lay.xaxis.title and lay.xaxis.title.font:
        lay.xaxis.title.font.size = s(lay.xaxis.title.font.size or th.AXIS_TITLE_SIZE)
    for ann in lay.annotations:
        if ann.font is not None and ann.font.size:
            ann.font.size = s(ann.font.size)
        if ann.yshift:
            ann.yshift = s(ann.yshift)
    for trace in out.data:
        if trace.type == "scatter" and isinstance(trace.marker.size, (int, float)):
            trace.marker.size = s(trace.marker.size)
    return out
