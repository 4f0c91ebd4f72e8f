"""Helpers shared by the figure builders: numbers, dates, status notes, updates.

Nothing here keeps state or computes a statistic; these functions only turn
the engine's numbers into display units (a day offset into an axis date, a
probability into "> 99%") and build the pieces every panel uses (the empty
panel, the status badge, the highlight of a segment).
"""

from __future__ import annotations

import copy
import datetime as _dt
import math
import textwrap

import plotly.graph_objects as go

from bendline.inference.wording import verdict_of

from .. import theme as th

MS_PER_DAY = 86_400_000
MONTHS = ("Jan", "Feb", "Mar", "Apr", "May", "Jun", "Jul", "Aug", "Sep", "Oct", "Nov", "Dec")
WEEKDAYS = ("Mon", "Tue", "Wed", "Thu", "Fri", "Sat", "Sun")

PROVISIONAL_NOTE = "Provisional: sampling in progress, not yet converged"
NOT_CONVERGED_NOTE = "Not reportable: do not report"
NO_FIT_NOTE = "No model fit yet: showing the data only"

#: Height of an empty panel (px) unless told otherwise.
EMPTY_HEIGHT = 300
#: Characters per line of an empty panel's message (fits a 400 px column).
EMPTY_LINE_CHARS = 40


# ---------------------------------------------------------------- numbers

def num(v):
    """A finite float, or None."""
    if v is None:
        return None
    try:
        f = float(v)
    except (TypeError, ValueError):
        return None
    return f if math.isfinite(f) else None


def nums(values):
    """:func:`num` of each value (None stays None)."""
    return [num(v) for v in (values or [])]


def ordinal(n):
    """'2nd', '3rd', '11th' ..."""
    n = int(n)
    suffix = "th" if 10 <= n % 100 <= 20 else {1: "st", 2: "nd", 3: "rd"}.get(n % 10, "th")
    return f"{n}{suffix}"


# ------------------------------------------------------------------ dates

def parse_date(s):
    """A ``datetime.datetime`` from an ISO date or date-time string."""
    if isinstance(s, _dt.datetime):
        return s
    if isinstance(s, _dt.date):
        return _dt.datetime(s.year, s.month, s.day)
    return _dt.datetime.fromisoformat(str(s).strip().replace("T", " ").rstrip("Z"))


def fmt_x(when):
    """Plotly date string: ``YYYY-MM-DD`` at midnight, else with the time."""
    when = when.replace(microsecond=0) if when.microsecond < 500_000 else (
        when + _dt.timedelta(microseconds=1_000_000 - when.microsecond))
    if when.hour == when.minute == when.second == 0:
        return when.strftime("%Y-%m-%d")
    return when.strftime("%Y-%m-%d %H:%M:%S")


def series_start(series):
    return parse_date(series["start"])


def interval_of(series, snapshot=None):
    """Days per value: the snapshot's ``interval_days`` when present, else the series'."""
    for source in (snapshot, series):
        step = (source or {}).get("interval_days")
        if step:
            return int(step)
    return 1


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
    return fmt_x(series_start(series) + _dt.timedelta(days=float(day)))


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
        when = parse_date(x)
    return (when - series_start(series)).total_seconds() / 86400.0


def mid_x(date_str, interval_days):
    """Axis date of the midpoint of the interval starting at ``date_str``."""
    return fmt_x(parse_date(date_str) + _dt.timedelta(days=interval_days / 2.0))


def band_x(dates, interval_days):
    return [mid_x(d, interval_days) for d in dates]


def label_date(d, year=True):
    """'14 Mar 2026' (or '14 Mar')."""
    d = parse_date(d)
    return f"{d.day} {MONTHS[d.month - 1]} {d.year}" if year else f"{d.day} {MONTHS[d.month - 1]}"


def day_name(date_str):
    """'Sat 14 Mar 2026'."""
    d = parse_date(date_str)
    return f"{WEEKDAYS[d.weekday()]} {label_date(d)}"


def value_label(date_str, interval_days):
    """Hover label of the value counted from ``date_str``: a day, or 'week of' a day."""
    return day_name(date_str) if interval_days == 1 else f"week of {day_name(date_str)}"


# ----------------------------------------------------------- snapshot state

def has_fit(snapshot):
    return bool(snapshot) and bool(snapshot.get("band"))


def change_colour(j):
    return th.CHANGE_DATE_COLOURS[j % len(th.CHANGE_DATE_COLOURS)]


def is_final(snapshot):
    """True when the snapshot is the last of a run and the engine's verdict says reportable.

    Parameters
    ----------
    snapshot : dict or None

    Returns
    -------
    bool
    """
    if not snapshot or snapshot.get("phase") != "done":
        return False
    return verdict_of(snapshot.get("diagnostics"))[0]


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


def status_badge(note, *, yshift=8):
    """The small status badge of a panel, on its own line just above the plot (left).

    Parameters
    ----------
    note : str or None
        From :func:`status_note`; None gives a hidden badge (kept so that
        the annotation's index stays the same while a run goes on).
    yshift : int
        Pixels between the plot area's top edge and the badge.

    Returns
    -------
    dict
        A Plotly annotation named "status".
    """
    return {
        "name": "status", "text": note or "", "visible": note is not None,
        "xref": "paper", "yref": "paper", "x": 0, "y": 1,
        "yshift": yshift, "xanchor": "left", "yanchor": "bottom", "showarrow": False, "align": "left",
        "font": {"size": th.SMALL_SIZE, "color": th.WARNING_TEXT}, "bgcolor": th.WARNING_FILL,
        "bordercolor": th.WARNING_BORDER, "borderwidth": 1, "borderpad": 3,
    }


# --------------------------------------------------------------- segments

def segment_span(series, snapshot, segment):
    """(x0, x1) axis dates of a 1-based segment, or None."""
    if segment is None or not snapshot:
        return None
    for seg in snapshot.get("segments") or []:
        if seg.get("index") == segment:
            if num(seg.get("start_day")) is not None and num(seg.get("end_day")) is not None:
                return day_to_x(series, seg["start_day"]), day_to_x(series, seg["end_day"])
            return fmt_x(parse_date(seg["start_date"])), fmt_x(parse_date(seg["end_date"]))
    return None


def highlight_shape(series, snapshot, segment, *, yref="paper"):
    """Shading of a segment's span on a date axis (hidden while it has no span)."""
    span = segment_span(series, snapshot, segment)
    x0, x1 = span if span else (series["start"], series["start"])
    return {
        "type": "rect", "name": "highlighted segment", "xref": "x", "yref": yref,
        "x0": x0, "x1": x1, "y0": 0, "y1": 1, "fillcolor": th.HIGHLIGHT, "line": {"width": 0},
        "layer": "below", "editable": False, "visible": span is not None,
    }


def default_x_range(series, snapshot):
    """Date range of the series plus the projection (as on the main chart)."""
    step = interval_of(series)
    start = series_start(series)
    end = start + _dt.timedelta(days=step * len(series.get("values") or []))
    proj = (snapshot or {}).get("projection") or {}
    if proj.get("dates"):
        end = max(end, parse_date(proj["dates"][-1]) + _dt.timedelta(days=step))
    return [fmt_x(start), fmt_x(end)]


# ------------------------------------------------------------ empty panel

def centred_note(message):
    """A centred message, wrapped into short lines (``<br>``) for narrow panels."""
    lines = textwrap.wrap(message, EMPTY_LINE_CHARS, break_long_words=False) if "<br>" not in message else []
    return {
        "text": "<br>".join(lines) if lines else message, "xref": "paper", "yref": "paper", "x": 0.5, "y": 0.5,
        "xanchor": "center", "yanchor": "middle", "showarrow": False,
        "font": {"size": th.NOTE_SIZE, "color": th.MUTED_INK},
    }


def empty_figure(message, *, height=EMPTY_HEIGHT):
    """A blank panel carrying one centred message (before any data or fit).

    Parameters
    ----------
    message : str
    height : int
        Panel height in px.

    Returns
    -------
    plotly.graph_objects.Figure
    """
    layout = th.base_layout(
        height=height,
        xaxis={"visible": False}, yaxis={"visible": False},
        margin={"l": 20, "r": 20, "t": 20, "b": 20},
        annotations=[centred_note(message)],
    )
    return go.Figure(layout=layout)


# ---------------------------------------------------------------- updates

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
