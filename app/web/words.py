"""Each chart in words: the text alternative a screen reader reads instead of the pixels.

Pure functions from the data a figure is drawn from (the series dict, a
snapshot or result view) to a list of short sentences. Every number and
phrase comes from the wording every view already uses
(:mod:`inference.wording`, the figures' own notes and labels), so the words
say exactly what the chart and the headline say; nothing here computes a
statistic.
"""

from __future__ import annotations

import datetime as _dt

from bendline.inference.wording import (change_date_text, fmt_date, growth_block, rate_text,
                                        summary_sentence, unit_of)

from .figures import diagnostics_summary, segment_label, status_note
from .figures.checks import residual_title, weekday_text
from .figures.rates import growth_text
from .presenting import PROJECTION_LABEL

#: Summary line of each chart's "in words" fold, by chart.
TITLES = {
    "main": "Main chart in words", "hist": "Change-date chart in words", "rates": "Growth rates in words",
    "trace": "Trace plot in words", "weekday": "Day-of-week chart in words",
    "residuals": "Model check in words",
}


def _series_line(series):
    values = series.get("values") or []
    step = int(series.get("interval_days") or 1)
    start = _dt.date.fromisoformat(str(series["start"])[:10])
    end = start + _dt.timedelta(days=step * max(len(values) - 1, 0))
    kind = "daily" if step == 1 else "weekly"
    name = series.get("name") or "series"
    return f"{name}: {len(values)} {kind} counts, {fmt_date(start.isoformat())} to {fmt_date(end.isoformat())}."


def _status(view):
    note = status_note(view)
    return [f"{note}."] if note else []


def main_words(series, view, tentative=()):
    """The main chart: the data, the verdict's note, the summary, each change date, the projection.

    Parameters
    ----------
    series : dict or None
        ``Series.to_dict()`` (start, interval_days, values, name).
    view : dict or None
        A snapshot or result view.
    tentative : list of {"day", "spread_days"}
        The analyst's tentative change dates drawn on the chart.
    """
    if not series:
        return ["No series loaded."]
    out = [_series_line(series)]
    start = _dt.date.fromisoformat(str(series["start"])[:10])
    for i, c in enumerate(tentative or []):
        day = start + _dt.timedelta(days=int(round(c["day"])))
        out.append(f"Tentative change date {i + 1}: {fmt_date(day.isoformat())} ± {c['spread_days']:g} days.")
    out += _status(view)
    if not view or not view.get("current"):
        return out
    out.append(summary_sentence(view))
    for i, cp in enumerate(view.get("changepoints") or []):
        out.append(f"Estimated change date {i + 1}: {change_date_text(cp)}.")
    if ((view.get("projection") or {}).get("dates")):
        proj = view["projection"]["dates"]
        out.append(f"Projection {fmt_date(proj[0])} to {fmt_date(proj[-1])}: {PROJECTION_LABEL}.")
    return out


def changes_words(view):
    """The change-date chart: each change date's distribution as its median (or modes) and interval."""
    cps = (view or {}).get("changepoints") or []
    if not cps:
        return _status(view) + ["No estimated change dates yet."]
    return _status(view) + [f"Change date {i + 1}: {change_date_text(cp)}." for i, cp in enumerate(cps)]


def rates_words(view):
    """The growth-rate panel: each segment's dates, rate with its interval, doubling or halving time."""
    segs = (view or {}).get("segments") or []
    if not segs:
        return _status(view) + ["No growth rates yet."]
    unit = unit_of(view)
    out = _status(view)
    for i, seg in enumerate(segs):
        label = segment_label(seg, with_year=True, last=i == len(segs) - 1, series_end=view.get("series_end"),
                              interval_days=int(view.get("interval_days") or 1))
        first, second = growth_text(seg)
        out.append(f"{label}: {rate_text(growth_block(seg, unit), unit)}; {first}; {second}.")
    return out


def trace_words(view, parameter=None):
    """The trace plot: which quantity is shown and the convergence sentence (the table has the numbers)."""
    out = [diagnostics_summary(view)]
    if parameter:
        out.insert(0, f"Draws of {parameter}, one line per chain; the convergence table lists R-hat and ESS for "
                      "every quantity.")
    return out


def weekday_words(view):
    """The day-of-week panel: each day's factor on counts with its interval."""
    days = (view or {}).get("weekday")
    if not days:
        return _status(view) + ["No day-of-week effect shown."]
    return _status(view) + [weekday_text(d) + "." for d in days]


def residual_words(view):
    """The predictive check: the coverage of the 90% predictive intervals."""
    checks = (view or {}).get("checks")
    if not checks:
        return _status(view) + ["No model check yet."]
    return _status(view) + [residual_title(checks) + "."]
