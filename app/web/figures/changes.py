"""The change-date chart: where the posterior draws put each change date.

Drawn on a date axis that matches the main chart (same range by default, same
interval midpoints), so a bin sits under the count bar of the interval it
covers. The engine's histograms are on whole intervals (one bin per day or per
week); older snapshots had bins of a fraction more than a day, which are drawn
as they are.
"""

from __future__ import annotations

import plotly.graph_objects as go

from .. import theme as th
from bendline.inference.wording import fmt_prob

from .common import (MS_PER_DAY, change_colour, day_to_x, default_x_range, empty_figure, has_fit,
                     highlight_shape, interval_of, label_date, num, nums, status_badge, status_note)

TITLE = "Change dates: where the draws put them"
HEIGHT = 340
#: Index of the status badge in ``layout.annotations``.
STATUS_ANNOTATION = 0


def _histogram_parts(snapshot):
    hist = (snapshot or {}).get("changepoint_histograms") or {}
    return nums(hist.get("edges_day")), hist.get("counts") or []


def _bin_word(edges, interval_days):
    """What one bin covers: 'day', 'week' or 'N-day bin'."""
    if len(edges) < 2 or edges[0] is None or edges[1] is None:
        return {1: "day", 7: "week"}.get(interval_days, "bin")
    width = edges[1] - edges[0]
    for days, word in ((1, "day"), (7, "week")):
        if abs(width - days) <= 0.05 * days:
            return word
    return f"{width:.1f}-day bin"


def _changepoint_dynamic(series, snapshot):
    edges, counts = _histogram_parts(snapshot)
    cps = (snapshot or {}).get("changepoints") or []
    bars, medians = [], []
    for j, shares in enumerate(counts):
        xs, ys, widths = [], [], []
        for b, share in enumerate(shares):
            share = num(share)
            if not share or b + 1 >= len(edges) or edges[b] is None or edges[b + 1] is None:
                continue  # empty bins are left out (smaller updates)
            xs.append(day_to_x(series, (edges[b] + edges[b + 1]) / 2.0))
            ys.append(share)
            widths.append((edges[b + 1] - edges[b]) * MS_PER_DAY)
        bars.append({"x": xs, "y": ys, "width": widths})
        cp = cps[j] if j < len(cps) else {}
        modes = cp.get("modes") or []
        if len(modes) > 1:  # separate modes: a marker at each, never a median between them
            xs, ys, texts, sizes = [], [], [], []
            for m in modes:
                mx = day_to_x(series, num(m.get("median_day")) or 0.0)
                text = (f"change date {j + 1}: around {label_date(m['median_date'])} "
                        f"({fmt_prob(m.get('probability'))} of draws)<br>90% interval "
                        f"{label_date(m['q05_date'])} to {label_date(m['q95_date'])}")
                xs += [mx, mx, None]
                ys += [0, 1, None]
                texts += [text, text, ""]
                sizes += [0, 12, 0]
            medians.append({"x": xs, "y": ys, "hovertext": texts, "marker": _median_marker(j, sizes)})
            continue
        med = num(cp.get("median_day"))
        if med is None:
            medians.append({"x": [], "y": [], "hovertext": []})
            continue
        mx = day_to_x(series, med)
        text = (f"change date {j + 1}: median {label_date(cp['median_date'])}"
                if cp.get("median_date") else f"change date {j + 1}")
        if cp.get("q05_date") and cp.get("q95_date"):
            text += f"<br>90% interval {label_date(cp['q05_date'])} to {label_date(cp['q95_date'])}"
        medians.append({"x": [mx, mx], "y": [0, 1], "hovertext": [text, text], "marker": _median_marker(j, [0, 12])})
    return bars, medians


def _median_marker(j, sizes):
    return {"symbol": "diamond", "size": sizes, "color": change_colour(j), "line": {"color": th.INK, "width": 1}}


def _averaged_trace(series, averaged):
    """The change probability averaged over segment counts, as a step line (or None)."""
    edges, prob = nums((averaged or {}).get("edges_day")), nums((averaged or {}).get("probability"))
    if len(edges) < 2 or len(prob) != len(edges) - 1:
        return None
    xs, ys = [], []
    for b, p in enumerate(prob):
        xs += [day_to_x(series, edges[b]), day_to_x(series, edges[b + 1])]
        ys += [p or 0.0, p or 0.0]
    ks = ", ".join(sorted((averaged.get("weights") or {}), key=int))
    return {"x": xs, "y": ys, "name": f"any change date, averaged over K = {ks} (stacking weights)"}


def changepoint_figure(series, snapshot, *, x_range=None, highlight_segment=None, averaged=None):
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
    averaged : dict, optional
        A "How many segments?" comparison's change probability averaged over
        K (``edges_day``, ``probability``, ``weights``): drawn as a black step
        line, the last trace.

    Returns
    -------
    plotly.graph_objects.Figure
        Traces: one bar trace per change date ("change date 1", ...), then one
        median marker line per change date (on a hidden 0-1 axis; one marker
        per mode when a change date has separate modes), then the averaged
        line when given. An empty
        panel with a message before the first draws or with one segment. The
        status badge is ``layout.annotations[0]`` (hidden when final).
    """
    if not has_fit(snapshot):
        return empty_figure("Change-date distributions appear once the first draws arrive.")
    edges, counts = _histogram_parts(snapshot)
    if not counts:
        return empty_figure("One segment: there are no change dates to estimate.")
    bars, medians = _changepoint_dynamic(series, snapshot)
    word = _bin_word(edges, interval_of(series, snapshot))
    traces = []
    for j, b in enumerate(bars):
        traces.append(go.Bar(
            name=f"change date {j + 1}", legendgroup=f"cp{j}",
            marker={"color": change_colour(j), "opacity": 0.7, "line": {"width": 0}},
            hovertemplate=f"change date {j + 1}: %{{y:.1%}} of draws in the {word} around "
                          "%{x|%d %b %Y}<extra></extra>",
            **b))
    for j, m in enumerate(medians):
        traces.append(go.Scatter(
            name=f"change date {j + 1}: median", legendgroup=f"cp{j}", showlegend=False, yaxis="y2",
            mode="lines+markers", line={"color": change_colour(j), "width": th.LINE_THIN, "dash": "dot"},
            hoverinfo="text", cliponaxis=False, **m))
    avg = _averaged_trace(series, averaged)
    if avg is not None:
        traces.append(go.Scatter(mode="lines", line={"color": th.INK, "width": th.LINE_THIN}, legendgroup="avg",
                                 hovertemplate="%{y:.1%} in this " + word + ", averaged over the segment counts"
                                               "<extra></extra>", **avg))
    layout = th.base_layout(
        height=HEIGHT,
        title={"text": TITLE},
        uirevision=f"changes|{series.get('name')}|{series.get('start')}",
        barmode="overlay", bargap=0,
        # room for the title and the status badge above, the legend below
        margin={"l": 76, "r": 24, "t": 66, "b": 84},
        xaxis={"type": "date", "title": {"text": "Date"}, "range": list(x_range or default_x_range(series, snapshot)),
               "autorange": False},
        yaxis={"title": {"text": f"Share of draws per {word}"}, "tickformat": ".0%", "rangemode": "tozero"},
        yaxis2={"overlaying": "y", "range": [0, 1], "visible": False, "fixedrange": True, "showgrid": False},
        legend={"orientation": "h", "yref": "container", "y": 0.01, "yanchor": "bottom",
                "x": 0, "xanchor": "left", "font": {"size": th.SMALL_SIZE}},
        annotations=[status_badge(status_note(snapshot), yshift=6)],
        shapes=[highlight_shape(series, snapshot, highlight_segment)] if highlight_segment is not None else [],
    )
    return go.Figure(data=traces, layout=layout)


def changepoint_updates(series, snapshot, averaged=None):
    """What changes in :func:`changepoint_figure` from one snapshot to the next.

    Parameters
    ----------
    series : dict
    snapshot : dict or None

    Returns
    -------
    dict
        ``{"trace_count": 2*(K-1), "traces": {...}, "annotations": {0: status badge}}``;
        ``trace_count`` 0 before the first draws (rebuild then).
    """
    if not has_fit(snapshot):
        return {"trace_count": 0, "traces": {}}
    bars, medians = _changepoint_dynamic(series, snapshot)
    n = len(bars)
    traces = {j: b for j, b in enumerate(bars)}
    traces.update({n + j: m for j, m in enumerate(medians)})
    avg = _averaged_trace(series, averaged)
    if avg is not None:
        traces[2 * n] = {"x": avg["x"], "y": avg["y"]}
    return {"trace_count": 2 * n + (avg is not None), "traces": traces,
            "annotations": {STATUS_ANNOTATION: status_badge(status_note(snapshot), yshift=6)}}
