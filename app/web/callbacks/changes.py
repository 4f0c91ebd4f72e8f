"""Tentative change dates: add (button or chart click), move (type a date, or drag), set spread, remove."""

from __future__ import annotations

import re

import numpy as np
from dash import ALL, Input, Output, State, ctx, dcc, html, no_update

from .. import ids
from ..context import get_series, services, store_guarded

SHAPE_KEY = re.compile(r"^shapes\[(\d+)\]\.x0$")
ANY_SHAPE_KEY = re.compile(r"^shapes\[(\d+)\]")
DEFAULT_SPREAD = 14.0


def day_of(series, x):
    """Whole days from the series start of a chart x value (a date string), or None."""
    if x is None:
        return None
    try:
        when = np.datetime64(str(x)[:10], "D")
    except ValueError:
        return None
    day = float((when - series.start) / np.timedelta64(1, "D"))
    last = float((series.end - series.start) / np.timedelta64(1, "D")) + series.interval_days
    return float(min(max(day, 0.0), last))


def date_of(series, day):
    return str(series.start + np.timedelta64(int(round(day)), "D"))


def _spot_for_new(series, cps):
    """Middle of the widest stretch without a change date."""
    end = float((series.end - series.start) / np.timedelta64(1, "D")) + series.interval_days
    edges = [0.0] + sorted(c["day"] for c in cps) + [end]
    gaps = np.diff(edges)
    i = int(np.argmax(gaps))
    return float(round(edges[i] + gaps[i] / 2))


def edit(add_clicks, click, relayout, spreads, removes, cps, series_key):
    """Apply one edit to the list of tentative change dates (kept in date order)."""
    series, _ = get_series(services().store, series_key)
    if series is None:
        return no_update
    cps = [dict(c) for c in (cps or [])]
    trig = ctx.triggered_id
    if trig == ids.ADD_CHANGE:
        cps.append({"day": _spot_for_new(series, cps), "spread_days": DEFAULT_SPREAD})
    elif trig == ids.MAIN and ctx.triggered[0]["prop_id"].endswith("clickData"):
        points = (click or {}).get("points") or []
        day = day_of(series, points[0].get("x")) if points else None
        if day is None or any(abs(c["day"] - day) < 1 for c in cps):
            return no_update
        cps.append({"day": day, "spread_days": DEFAULT_SPREAD})
    elif trig == ids.MAIN:
        # a drag: {'shapes[i].x0': ..., 'shapes[i].x1': ...}; other keys (autosize,
        # zoom) are not edits of the lines. Shapes past the lines (the spread
        # shading, the highlighted segment) are no handles: if one was moved
        # anyway, the unchanged list goes back so the chart is redrawn from it
        # and the shading is in step with the spread fields again.
        moved = False
        for key, value in (relayout or {}).items():
            m = SHAPE_KEY.match(key)
            if m and int(m.group(1)) < len(cps):
                day = day_of(series, value)
                if day is not None:
                    cps[int(m.group(1))]["day"] = day
                    moved = True
            elif (m := ANY_SHAPE_KEY.match(key)) and int(m.group(1)) >= len(cps):
                moved = True
        if not moved:
            return no_update
    elif isinstance(trig, dict) and trig.get("type") == ids.CHANGE_SPREAD:
        i = trig["index"]
        value = ctx.triggered[0]["value"]
        if i >= len(cps) or value is None:
            return no_update
        value = float(min(max(value, 0.5), 365.0))
        if value == cps[i]["spread_days"]:
            return no_update  # the inputs were re-drawn, nothing changed
        cps[i]["spread_days"] = value
    elif isinstance(trig, dict) and trig.get("type") == ids.CHANGE_REMOVE:
        i = trig["index"]
        if i >= len(cps) or not ctx.triggered[0]["value"]:
            return no_update
        cps.pop(i)
    else:
        return no_update
    cps.sort(key=lambda c: c["day"])
    return cps


DATE_TEXT = re.compile(r"^\s*(\d{4}-\d{2}-\d{2})\s*$")


def typed_day(series, text):
    """(day offset, None) of a date typed into a change date's field, or (None, message in words)."""
    first, last = str(series.start), str(series.end)
    m = DATE_TEXT.match(str(text or ""))
    try:
        when = np.datetime64(m.group(1), "D") if m else None
    except ValueError:
        when = None
    if when is None:
        return None, f"{text!r} is not a date; write it as YYYY-MM-DD, from {first} to {last}."
    if when < series.start or when > series.end:
        return None, f"{m.group(1)} is outside the series; choose a date from {first} to {last}."
    return float((when - series.start) / np.timedelta64(1, "D")), None


def edit_typed(add_clicks, click, relayout, spreads, removes, dates, cps, series_key):
    """:func:`edit`, plus a date typed into a change date's field: (change dates, message)."""
    trig = ctx.triggered_id
    if isinstance(trig, dict) and trig.get("type") == ids.CHANGE_DATE:
        series, _ = get_series(services().store, series_key)
        i = trig["index"]
        cps = [dict(c) for c in (cps or [])]
        if series is None or i >= len(cps):
            return no_update, no_update
        day, message = typed_day(series, ctx.triggered[0]["value"])
        if message:
            return no_update, f"Change date {i + 1}: {message}"
        if day == cps[i]["day"]:
            return no_update, ""  # the fields were re-drawn, nothing changed
        cps[i]["day"] = day
        cps.sort(key=lambda c: c["day"])
        return cps, ""
    out = edit(add_clicks, click, relayout, spreads, removes, cps, series_key)
    return out, (no_update if out is no_update else "")


def render_list(cps, series_key, segments):
    """The change-date rows and the segment count they imply.

    Each row is a date field (type a date to move it), its spread and a
    Remove button, each labelled with the change date's number, so the list
    works from the keyboard; the chart's click and drag are the mouse's
    shortcut to the same edits.
    """
    series, _ = get_series(services().store, series_key)
    cps = cps or []
    if series is None:
        return [], no_update, False, ""
    rows = []
    for i, c in enumerate(cps):
        n = i + 1
        # each field inside its label (the fields' ids are pattern-matching dicts)
        rows.append(html.Div(className="change-row", role="group", **{"aria-label": f"Change date {n}"}, children=[
            html.Span(f"{n}.", className="change-num", **{"aria-hidden": "true"}),
            html.Label(className="change-field", children=[
                html.Span(f"Change date {n} (YYYY-MM-DD)", className="visually-hidden"),
                dcc.Input(id={"type": ids.CHANGE_DATE, "index": i}, type="text", value=date_of(series, c["day"]),
                          debounce=True, className="text change-date", style={"width": "7.5em"},
                          placeholder="YYYY-MM-DD"),
            ]),
            html.Label(className="change-field", children=[
                html.Span("±", **{"aria-hidden": "true"}),
                html.Span(f"Spread of change date {n} in days", className="visually-hidden"),
                dcc.Input(id={"type": ids.CHANGE_SPREAD, "index": i}, type="number",
                          value=c["spread_days"], min=0.5, max=365, step=0.5, debounce=True,
                          className="num", style={"width": "4.5em"}),
                html.Span("days", **{"aria-hidden": "true"}),
            ]),
            html.Button("Remove", id={"type": ids.CHANGE_REMOVE, "index": i}, className="btn small",
                        n_clicks=0, **{"aria-label": f"Remove change date {n}"}),
        ]))
    if cps:
        return rows, len(cps) + 1, True, (f"{len(cps) + 1} segments: set by the {len(cps)} change "
                                          f"date{'s' if len(cps) > 1 else ''}; remove them to set it freely.")
    return rows, no_update, False, "No tentative change dates: the change dates get a uniform prior."


def register(app):
    app.callback(
        Output(ids.CHANGEPOINTS, "data"),
        Output(ids.CHANGE_ERROR, "children"),
        Input(ids.ADD_CHANGE, "n_clicks"),
        Input(ids.MAIN, "clickData"),
        Input(ids.MAIN, "relayoutData"),
        Input({"type": ids.CHANGE_SPREAD, "index": ALL}, "value"),
        Input({"type": ids.CHANGE_REMOVE, "index": ALL}, "n_clicks"),
        Input({"type": ids.CHANGE_DATE, "index": ALL}, "value"),
        State(ids.CHANGEPOINTS, "data"),
        State(ids.SERIES_KEY, "data"),
        prevent_initial_call=True,
    )(store_guarded(edit_typed, 2, {1: lambda t: t}))
    app.callback(
        Output(ids.CHANGE_LIST, "children"),
        Output(ids.SEGMENTS, "value", allow_duplicate=True),
        Output(ids.SEGMENTS, "disabled"),
        Output(ids.SEGMENTS_NOTE, "children"),
        Input(ids.CHANGEPOINTS, "data"),
        Input(ids.SERIES_KEY, "data"),
        State(ids.SEGMENTS, "value"),
        prevent_initial_call="initial_duplicate",
    )(store_guarded(render_list, 4, {}))
