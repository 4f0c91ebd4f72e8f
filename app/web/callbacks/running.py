"""Fit and Stop, and the run list."""

from __future__ import annotations

from dash import Input, Output, State, ctx, dcc, html, no_update

import numpy as np

from bendline.inference.errors import InputError
from bendline.inference.options import BY_NAME as OPTION_BY_NAME
from bendline.inference.options import engine_options, label_for

from ...runs import QueueUnavailable
from .. import ids
from ..context import current_user, get_series, services, store_guarded
from ..controls import NAMES, control_id, public_from_controls

def options_from_controls(series, cps, values):
    """(engine options, public options) the controls describe, validated by the option table.

    Parameters
    ----------
    series : Series
    cps : list of {"day", "spread_days"}
        The tentative change dates (day offsets from the series start).
    values : dict
        Control values by option name (:data:`app.web.controls.NAMES`).
    """
    public = public_from_controls(values)
    if cps:
        public["change_date"] = [f"{series.start + np.timedelta64(int(round(c['day'])), 'D')}:{c['spread_days']:g}"
                                 for c in cps if isinstance(c, dict) and "day" in c]
        public.pop("segments", None)  # the change dates set the segment count
    for name in ("segments", "chains", "draws"):
        if name not in public and not (name == "segments" and cps):
            raise InputError("this value is empty; enter a number", column=name)
    return engine_options(public, series), public


def label_of(column):
    """The control's label for an error about this option (its name when it has no control)."""
    option = OPTION_BY_NAME.get(column)
    return label_for(option) if option is not None else column


def submit_from_controls(series_key, cps, controls, submit):
    """Validate the controls' options and submit them; returns (record, None) or (None, message).

    ``controls`` are the option controls' values by option name;
    ``submit(series, options, owner, public)`` stores the run(s). Shared by
    Fit and "How many segments?".
    """
    svc = services()
    series, _ = get_series(svc.store, series_key)
    if series is None:
        return None, "Load a series first."
    user, _ = current_user()
    try:
        opts, public = options_from_controls(series, cps, controls)
        return submit(series, opts, user, public), None
    except InputError as exc:
        label = label_of(exc.column)
        return None, f"{label}: {exc.detail}" if label else str(exc)
    except QueueUnavailable as exc:
        return None, f"The fit queue is unavailable ({exc}); nothing was lost, try again shortly."
    except PermissionError as exc:
        return None, str(exc)


def named(values):
    """Control values by option name, from the callback's positional values (in :data:`NAMES` order)."""
    return dict(zip(NAMES, values))


def fit(n_clicks, series_key, cps, *values_and_shown):
    """Submit a run; returns (url search, run id, error message).

    A fit of a board's series (the run shown was opened from a board, and
    the series is the same) becomes that series' current run on the board.
    """
    if not n_clicks:
        return no_update, no_update, no_update
    *values, shown = values_and_shown
    runs = services().runs
    from ...boards import BoardService

    boards = BoardService(runs)
    on_board = boards.board_of(shown) if isinstance(shown, str) else None

    def submit(series, opts, user, public):
        same = on_board is not None and series.content_hash() == on_board[2]
        rec = runs.submit(series, opts, owner=user, spec=public, parent=on_board[0] if same else None)
        if same:
            boards.attach_refit(on_board[0], on_board[1], rec["id"])
        return rec

    rec, message = submit_from_controls(series_key, cps if isinstance(cps, list) else [], named(values), submit)
    if rec is None:
        return no_update, no_update, message
    return f"?run={rec['id']}", rec["id"], ""


def stop(n_clicks, run_id):
    if not n_clicks or not run_id:
        return no_update
    user, admin = current_user()
    try:
        services().runs.stop(run_id, user=user, admin=admin)
    except PermissionError as exc:
        return str(exc)
    except KeyError:
        return "That run no longer exists."
    return ""


def ask_delete(n_clicks, run_id):
    """The confirmation dialog, when a run is shown; otherwise a message."""
    if not n_clicks:
        return no_update, no_update
    if not isinstance(run_id, str) or services().runs.get(run_id) is None:
        return False, "No run is shown: open one from the list first."
    return True, ""


def delete(confirmed, run_id):
    """Delete the run shown (after the dialog); returns (url search, run id, message)."""
    if not confirmed or not isinstance(run_id, str):
        return no_update, no_update, no_update
    user, admin = current_user()
    try:
        gone = services().runs.delete(run_id, user=user, admin=admin)
    except PermissionError as exc:
        return no_update, no_update, str(exc)
    except KeyError:
        return "", None, "That run no longer exists."
    if gone:
        return "", None, "The run was deleted."
    return no_update, no_update, "The run is stopping; it is deleted as soon as its worker stops."


STATUS_WORDS = {
    "queued": "waiting in the queue", "running": "running", "converged": "converged",
    "unconverged": "finished, not converged", "stopped": "stopped", "failed": "failed",
}


def run_when(rec):
    """When a run was made, to the second, in UTC ("2026-12-02 14:43:05 UTC"); "" when unknown."""
    created = str(rec.get("created_at") or "")
    if len(created) < 19:
        return created
    return f"{created[:10]} {created[11:19]} UTC"


def run_words(rec):
    """(series, segments, when, status) of a run-list entry, in words.

    The segments part says when the analyst's tentative change dates set
    them ("3 segments, 2 change dates set").
    """
    k = rec.get("segments")
    seg = f"{k} segment{'s' if k != 1 else ''}" if isinstance(k, int) else "segments ?"
    cps = (rec.get("options") or {}).get("changepoint_priors") or []
    if isinstance(cps, list) and cps:
        seg += f", {len(cps)} change date{'s' if len(cps) != 1 else ''} set"
    status = STATUS_WORDS.get(rec.get("status"), str(rec.get("status")))
    return str(rec.get("series_name") or "series"), seg, run_when(rec), status


def run_rows(_clicks, n_intervals, run_id, _poll_off=None):
    """The run list, newest first: one link per run, each reading differently.

    An entry names the series, the segment count, when the run was made (to
    the second) and its status; two runs that still read alike (made in the
    same second) also show the start of their ids. Refreshed on demand, when
    the shown run changes or finishes (its poll stops), and every few polls
    while a run streams.
    """
    if ctx.triggered_id == ids.POLL and ctx.triggered[0]["prop_id"].endswith("n_intervals") and (n_intervals or 0) % 5:
        return no_update
    team = services().team
    recs = [r for r in services().runs.list(limit=300) if r.get("kind", "fit") == "fit"]
    # comparisons and their member fits are shown by "How many segments?"
    words = [run_words(r) + ((r.get("owner", ""),) if team else ()) for r in recs]
    seen = {}
    for w in words:
        seen[w] = seen.get(w, 0) + 1
    items = []
    for rec, w in zip(recs, words):
        series, seg, when, status = w[:4]
        sep = html.Span(", ", className="visually-hidden")
        label = [html.Span(series, className="run-series"), sep, html.Span(seg, className="run-k"), sep,
                 html.Span(when, className="run-when"), sep,
                 html.Span(status, className=f"run-status st-{rec['status']}")]
        if team:
            label += [sep, html.Span(f"by {w[4]}", className="run-owner")]
        if seen[w] > 1:
            label += [sep, html.Span(f"run {rec['id'][:8]}", className="run-id")]
        items.append(dcc.Link(label, href=f"/?run={rec['id']}",
                              className="run-item" + (" current" if rec["id"] == run_id else ""),
                              title=f"run {rec['id']}"))
    if not items:
        return html.Div("No runs yet.", className="field-hint")
    return items


def control_states():
    """The series, the change dates and the option controls, in the order of :func:`fit`."""
    return [State(ids.SERIES_KEY, "data"), State(ids.CHANGEPOINTS, "data"),
            *[State(control_id(name), "value") for name in NAMES]]


def register(app):
    controls = control_states()
    app.callback(
        Output(ids.DELETE_CONFIRM, "displayed"),
        Output(ids.DELETE_MESSAGE, "children"),
        Input(ids.DELETE_RUN, "n_clicks"),
        State(ids.RUN_ID, "data"),
        prevent_initial_call=True,
    )(store_guarded(ask_delete, 2, {1: lambda t: t}))
    app.callback(
        Output(ids.URL, "search", allow_duplicate=True),
        Output(ids.RUN_ID, "data", allow_duplicate=True),
        Output(ids.DELETE_MESSAGE, "children", allow_duplicate=True),
        Input(ids.DELETE_CONFIRM, "submit_n_clicks"),
        State(ids.RUN_ID, "data"),
        prevent_initial_call=True,
    )(store_guarded(delete, 3, {2: lambda t: t}))
    app.callback(
        Output(ids.URL, "search", allow_duplicate=True),
        Output(ids.RUN_ID, "data", allow_duplicate=True),
        Output(ids.FIT_ERROR, "children"),
        Input(ids.FIT, "n_clicks"),
        *controls,
        State(ids.RUN_ID, "data"),
        prevent_initial_call=True,
    )(store_guarded(fit, 3, {2: lambda t: t}))
    app.callback(
        Output(ids.FIT_ERROR, "children", allow_duplicate=True),
        Input(ids.STOP, "n_clicks"),
        State(ids.RUN_ID, "data"),
        prevent_initial_call=True,
    )(store_guarded(stop, 1, {0: lambda t: t}))
    app.callback(
        Output(ids.RUN_LIST, "children"),
        Input(ids.REFRESH_RUNS, "n_clicks"),
        Input(ids.POLL, "n_intervals"),
        Input(ids.RUN_ID, "data"),
        Input(ids.POLL, "disabled"),
    )(store_guarded(run_rows, 1, {}))
