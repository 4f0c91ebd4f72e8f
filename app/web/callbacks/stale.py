"""The out-of-date note: the fit shown was made with other settings than the controls now hold.

The controls' options and the shown run's are compared as the engine
receives them (:func:`inference.options.engine_options`, defaults filled in),
so leaving a field blank that defaults to the fitted value is no change, and
a change back to the fitted value clears the note. Fit (or opening a run,
which sets the controls from it) clears it too.
"""

from __future__ import annotations

from dash import Input, Output

from bendline.inference.errors import InputError
from bendline.inference.options import OPTIONS, engine_options, label_for, public_options

from .. import ids
from ..context import get_series, services, store_guarded
from ..controls import NAMES, control_id
from .running import label_of, named, options_from_controls

#: The note's first words (a test and the stylesheet's reader can find it by them).
STALE_LEAD = "Out of date:"


def _as_fitted(options, series):
    """Engine options with every default filled in, as :func:`engine_options` makes them."""
    return engine_options(public_options(options, series), series)


def changed_options(rec, series, cps, values):
    """Labels of the options the controls now set differently from the run, in the option table's order.

    Parameters
    ----------
    rec : dict
        The run record (its ``options`` are the engine's).
    series : Series
        The loaded series (the run's).
    cps : list of {"day", "spread_days"}
        The tentative change dates now.
    values : dict
        The option controls' values by option name.

    Raises
    ------
    InputError
        When the controls now hold a value that cannot be fitted.
    """
    now, _ = options_from_controls(series, cps, values)
    then = _as_fitted(rec.get("options") or {}, series)
    unit_days = series.interval_days
    return [label_for(o, unit_days) for o in OPTIONS
            if now.get(o.engine_key) != then.get(o.engine_key)]


def stale_note(run_id, series_key, cps, *values):
    """The note beside the results: "" while the controls still describe the fit shown."""
    svc = services()
    if not isinstance(run_id, str) or not run_id:
        return ""
    rec = svc.runs.get(run_id)
    series, _ = get_series(svc.store, series_key)
    if rec is None or series is None or rec.get("series_hash") != series.content_hash():
        return ""  # no fit of this series is shown
    if not isinstance(rec.get("options"), dict):
        return ""
    cps = [c for c in cps if isinstance(c, dict)] if isinstance(cps, list) else []
    try:
        changed = changed_options(rec, series, cps, named(values))
    except InputError as exc:
        label = label_of(exc.column)
        problem = f"{label}: {exc.detail}" if label else str(exc)
        return (f"{STALE_LEAD} the controls no longer match the fit shown, and one cannot be fitted "
                f"({problem}). Correct it and press Fit; the panels show the earlier fit.")
    except (TypeError, ValueError, KeyError):
        return f"{STALE_LEAD} the controls no longer match the fit shown. Press Fit to fit again."
    if not changed:
        return ""
    return (f"{STALE_LEAD} changed since the fit shown: {', '.join(changed)}. The panels show the earlier fit; "
            "press Fit to fit with the new settings.")


def register(app):
    app.callback(
        Output(ids.STALE_NOTE, "children"),
        Input(ids.RUN_ID, "data"),
        Input(ids.SERIES_KEY, "data"),
        Input(ids.CHANGEPOINTS, "data"),
        *[Input(control_id(name), "value") for name in NAMES],
    )(store_guarded(stale_note, 1, {}))
