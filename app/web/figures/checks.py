"""Model checks: the day-of-week reporting factors and the predictive-check residuals.

Both panels are laid out for a narrow column: one plot per row, short axis
titles, and the reading aid (what the reference lines mean) in a note under
the plot or the title rather than on the data.
"""

from __future__ import annotations

import plotly.graph_objects as go

from .. import theme as th
from .common import (band_x, empty_figure, has_fit, num, nums, parse_date, status_badge, status_note,
                     value_label)

WEEKDAY_HEIGHT = 360
WEEKDAY_NOTE = ("Dashed line at 1: an average day, no weekday effect.<br>"
                "Whiskers: 90% intervals.")

RESIDUAL_SUBTITLE = ("About 90% is expected. Points beyond the dotted lines<br>"
                     "(±2 sd from the prediction) surprised the model.")
RESIDUAL_HEIGHT_DAILY = 580
RESIDUAL_HEIGHT_WEEKLY = 400
_RESIDUAL_TOP, _RESIDUAL_BOTTOM = 118, 56  # px: title, subtitle and status badge; the last axis and its title
_RESIDUAL_GAP = 96  # px between the two panels: the date axis, its title, the second panel's heading
_WEEKDAY_PANEL = 120  # px, the by-weekday panel (daily series)
#: Index of the status badge in the residual figure's ``layout.annotations``.
RESIDUAL_STATUS_ANNOTATION = 0


# ------------------------------------------------------------------ weekday

def weekday_text(day):
    """'Monday: counts × 1.12 (90% interval 1.05 to 1.19)': one day's factor, as hovered and read aloud."""
    name = str(day.get("day"))
    m, a, b = num(day.get("median")), num(day.get("q05")), num(day.get("q95"))
    return f"{name}: counts × {m:.2f} (90% interval {a:.2f} to {b:.2f})" if None not in (m, a, b) else name


def weekday_figure(snapshot):
    """Day-of-week reporting factors with 90% intervals.

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
        1 explained by the note under the plot ("... no weekday effect");
        an empty-state panel when the effect was not fitted.
    """
    if not has_fit(snapshot) or "weekday" not in snapshot:
        return empty_figure("Day-of-week factors appear once the first draws arrive.")
    days = snapshot.get("weekday")
    if not days:
        return empty_figure("Weekday effect not fitted (weekly series or switched off)")
    names = [str(d.get("day")) for d in days]
    short = [n[:3] for n in names]
    med = [num(d.get("median")) for d in days]
    lo = [num(d.get("q05")) for d in days]
    hi = [num(d.get("q95")) for d in days]
    up = [None if h is None or m is None else h - m for h, m in zip(hi, med)]
    down = [None if m is None or low is None else m - low for m, low in zip(med, lo)]
    hover = [weekday_text(d) for d in days]
    trace = go.Scatter(
        name="day-of-week factor", x=short, y=med, mode="markers",
        marker={"color": th.BLUE, "size": 13, "symbol": "square"},
        error_y={"type": "data", "symmetric": False, "array": up, "arrayminus": down,
                 "color": th.BLUE, "thickness": 2.5, "width": 8},
        hovertext=hover, hoverinfo="text", showlegend=False)
    note = status_note(snapshot)
    layout = th.base_layout(
        height=WEEKDAY_HEIGHT,
        margin={"l": 76, "r": 20, "t": 36 if note else 14, "b": 100},
        xaxis={"title": {"text": "Day of week"}, "type": "category", "showgrid": False},
        yaxis={"title": {"text": "Factor on counts"}, "tickformat": ".2f"},
        shapes=[{"type": "line", "name": "no weekday effect", "xref": "paper", "x0": 0, "x1": 1, "yref": "y",
                 "y0": 1, "y1": 1, "line": {"color": th.REFERENCE_LINE, "width": th.LINE_THIN, "dash": "dash"},
                 "layer": "below"}],
        annotations=[{"name": "key", "text": WEEKDAY_NOTE, "xref": "paper", "x": 0, "xanchor": "left",
                      "yref": "paper", "y": 0, "yshift": -56, "yanchor": "top", "showarrow": False,
                      "align": "left", "font": {"size": th.SMALL_SIZE, "color": th.MUTED_INK}}]
        + ([status_badge(note)] if note else []),
        hovermode="closest",
    )
    return go.Figure(data=[trace], layout=layout)


# ---------------------------------------------------------------- residuals

def _checks_interval(snapshot, dates):
    """Days per checked value: the snapshot's ``interval_days``, else read off the dates."""
    if snapshot.get("interval_days"):
        return int(snapshot["interval_days"])
    if len(dates) >= 2:
        return max(1, (parse_date(dates[1]) - parse_date(dates[0])).days)
    return 1


def residual_title(checks):
    """The predictive check's headline: how much of the data its 90% intervals cover."""
    cov = num(checks.get("coverage_90"))
    if cov is None:
        return "90% predictive intervals: coverage not available"
    return f"90% predictive intervals cover {100 * cov:.0f}% of values"


def _residual_dynamic(snapshot):
    checks = snapshot.get("checks") or {}
    dates = checks.get("dates") or []
    step = _checks_interval(snapshot, dates)
    dyn = {0: {"x": band_x(dates, step), "y": nums(checks.get("pearson")),
               "customdata": [value_label(d, step) for d in dates]}}
    by_day = checks.get("residual_by_weekday")
    if by_day:
        dyn[1] = {"x": [str(d.get("day"))[:3] for d in by_day], "y": [num(d.get("mean")) for d in by_day],
                  "customdata": [[str(d.get("day")), d.get("n")] for d in by_day]}
    return dyn, residual_title(checks)


def _residual_badge(snapshot):
    return status_badge(status_note(snapshot), yshift=6)


def _residual_axes(snapshot, daily):
    """Layout of the axes: residuals over time on top, by weekday below (daily series)."""
    height = RESIDUAL_HEIGHT_DAILY if daily else RESIDUAL_HEIGHT_WEEKLY
    plot = height - _RESIDUAL_TOP - _RESIDUAL_BOTTOM
    out = {
        "height": height,
        "margin": {"l": 76, "r": 20, "t": _RESIDUAL_TOP, "b": _RESIDUAL_BOTTOM},
        "xaxis": {"type": "date", "title": {"text": "Date"}, "anchor": "y"},
        "yaxis": {"title": {"text": "Pearson residual"}, "anchor": "x"},
        "annotations": [_residual_badge(snapshot)],
    }
    if daily:
        split = (_WEEKDAY_PANEL + _RESIDUAL_GAP) / plot
        out["yaxis"]["domain"] = [split, 1]
        out["xaxis2"] = {"type": "category", "title": {"text": "Day of week"}, "showgrid": False, "anchor": "y2"}
        out["yaxis2"] = {"title": {"text": "Mean residual"}, "tickformat": ".2f", "anchor": "x2",
                         "domain": [0, _WEEKDAY_PANEL / plot]}
        out["annotations"].append({
            "name": "by weekday", "text": "Mean residual by day of week", "xref": "paper", "x": 0,
            "xanchor": "left", "yref": "paper", "y": _WEEKDAY_PANEL / plot, "yshift": 6, "yanchor": "bottom",
            "showarrow": False, "font": {"size": th.FONT_SIZE, "color": th.INK}})
    return out


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
        residual by day of week (bars, in a second panel below). The title
        states the coverage ("90% predictive intervals cover 91% of values");
        ``layout.annotations[0]`` is the status badge (hidden when final).
    """
    if not snapshot or not snapshot.get("checks"):
        return empty_figure("The model check appears once the first draws arrive.")
    dyn, title = _residual_dynamic(snapshot)
    daily = 1 in dyn
    traces = [go.Scatter(
        name="Pearson residual", mode="markers", marker={"color": th.BLUE, "size": 6, "opacity": 0.8},
        hovertemplate="%{customdata}: residual %{y:.2f}<extra></extra>", showlegend=False, **dyn[0])]
    if daily:
        traces.append(go.Bar(
            name="mean residual by day of week", xaxis="x2", yaxis="y2", width=0.6,
            marker={"color": th.SKY_BLUE, "line": {"color": th.BLUE, "width": 1}},
            hovertemplate="%{customdata[0]}: mean residual %{y:.3f} over %{customdata[1]} days<extra></extra>",
            showlegend=False, **dyn[1]))
    ref = {"type": "line", "xref": "x domain", "x0": 0, "x1": 1, "yref": "y", "layer": "below"}
    shapes = [dict(ref, y0=0, y1=0, line={"color": th.REFERENCE_LINE, "width": th.LINE_THIN})]
    shapes += [dict(ref, y0=v, y1=v, line={"color": th.MUTED_INK, "width": 1, "dash": "dot"}) for v in (-2, 2)]
    if daily:
        shapes.append({"type": "line", "xref": "x2 domain", "x0": 0, "x1": 1, "yref": "y2", "y0": 0, "y1": 0,
                       "line": {"color": th.REFERENCE_LINE, "width": th.LINE_THIN}, "layer": "above"})
    layout = th.base_layout(
        title={"text": title, "subtitle": {"text": RESIDUAL_SUBTITLE,
                                           "font": {"size": th.SMALL_SIZE, "color": th.MUTED_INK}}},
        shapes=shapes,
        hovermode="closest",
        uirevision="residuals",
        **_residual_axes(snapshot, daily),
    )
    return go.Figure(data=traces, layout=layout)


def residual_updates(snapshot):
    """What changes in :func:`residual_figure` from one snapshot to the next.

    Returns
    -------
    dict
        ``{"trace_count": 1 or 2, "traces": {...}, "annotations": {0: status
        badge}, "title": ...}``; ``trace_count`` 0 before the first check
        (rebuild then).
    """
    if not snapshot or not snapshot.get("checks"):
        return {"trace_count": 0, "traces": {}}
    dyn, title = _residual_dynamic(snapshot)
    return {"trace_count": len(dyn), "traces": dyn, "title": title,
            "annotations": {RESIDUAL_STATUS_ANNOTATION: _residual_badge(snapshot)}}
