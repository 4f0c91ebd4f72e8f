"""Fit and Stop, and the run list."""

from __future__ import annotations

from dash import Input, Output, State, ctx, dcc, html, no_update

from inference.errors import InputError

from ...runs import QueueUnavailable
from .. import ids
from ..context import current_user, get_series, services, store_guarded

LABELS = {
    "segments": "Segments", "family": "Observation model", "weekday": "Day-of-week effect",
    "jumps": "Level jumps", "drop_last": "Leave out the last values",
    "growth_rate_prior_pct_per_day": "Growth-rate prior", "min_segment_days": "Minimum segment length",
    "gi_mean": "Generation interval mean", "gi_sd": "Generation interval sd", "horizon": "Projection horizon",
    "chains": "Chains", "draws": "Draws per chain", "seed": "Seed", "changepoint_priors": "Change dates",
    "thin": "Keep every k-th draw",
}


def options_from_controls(series, cps, segments, family, weekday, jumps, growth, min_seg, drop_last,
                          gi_mean, gi_sd, horizon, chains, draws, seed, thin=1):
    """The fit options the controls describe (validated later by the engine)."""
    opts = {
        "segments": len(cps) + 1 if cps else segments,
        "family": family,
        "weekday": bool(weekday) and series.interval_days == 1,
        "jumps": bool(jumps),
        "drop_last": drop_last or 0,
        "horizon": horizon if horizon is not None else 14,
        "chains": chains,
        "draws": draws,
        "seed": seed if seed is not None else 1,
        "thin": thin if thin not in (None, "") else 1,
    }
    if min_seg not in (None, ""):
        opts["min_segment_days"] = min_seg
    if growth not in (None, ""):
        opts["growth_rate_prior_pct_per_day"] = growth
    if gi_mean not in (None, "") or gi_sd not in (None, ""):
        opts["gi_mean"], opts["gi_sd"] = gi_mean, gi_sd
    if cps:
        opts["changepoint_priors"] = [{"day": c["day"], "spread_days": c["spread_days"]} for c in cps]
    for key in ("segments", "chains", "draws"):
        if opts[key] in (None, ""):
            raise InputError("this value is empty; enter a number", column=key)
    return opts


def submit_from_controls(series_key, cps, controls, submit):
    """Validate the controls' options and submit them; returns (record, None) or (None, message).

    ``controls`` are the option controls' values in the order of
    :func:`options_from_controls` after ``cps``; ``submit(series, options,
    owner)`` stores the run(s). Shared by Fit and "How many segments?".
    """
    svc = services()
    series, _ = get_series(svc.store, series_key)
    if series is None:
        return None, "Load a series first."
    user, _ = current_user()
    try:
        opts = options_from_controls(series, cps, *controls)
        return submit(series, opts, user), None
    except InputError as exc:
        label = LABELS.get(exc.column, exc.column)
        return None, f"{label}: {exc.detail}" if label else str(exc)
    except QueueUnavailable as exc:
        return None, f"The fit queue is unavailable ({exc}); nothing was lost, try again shortly."
    except PermissionError as exc:
        return None, str(exc)


def fit(n_clicks, series_key, cps, *controls):
    """Submit a run; returns (url search, run id, error message)."""
    if not n_clicks:
        return no_update, no_update, no_update
    runs = services().runs
    rec, message = submit_from_controls(series_key, cps or [], controls,
                                        lambda series, opts, user: runs.submit(series, opts, owner=user))
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


STATUS_WORDS = {
    "queued": "waiting in the queue", "running": "running", "converged": "converged",
    "unconverged": "finished, not converged", "stopped": "stopped", "failed": "failed",
}


def run_rows(_clicks, n_intervals, run_id, _poll_off=None):
    """The run list, newest first: one link per run.

    Refreshed on demand, when the shown run changes or finishes (its poll
    stops), and every few polls while a run streams.
    """
    if ctx.triggered_id == ids.POLL and ctx.triggered[0]["prop_id"].endswith("n_intervals") and (n_intervals or 0) % 5:
        return no_update
    items = []
    for rec in services().runs.list(limit=300):
        if rec.get("kind", "fit") != "fit":
            continue  # comparisons and their member fits are shown by "How many segments?"
        when = rec.get("created_at", "")[5:16].replace("T", " ")
        status = STATUS_WORDS.get(rec["status"], rec["status"])
        label = [html.Span(when, className="run-when"), html.Span(rec.get("series_name", ""), className="run-series"),
                 html.Span(f"K={rec.get('segments')}", className="run-k"),
                 html.Span(status, className=f"run-status st-{rec['status']}")]
        if services().team:
            label.append(html.Span(rec.get("owner", ""), className="run-owner"))
        items.append(dcc.Link(label, href=f"/?run={rec['id']}",
                              className="run-item" + (" current" if rec["id"] == run_id else ""),
                              title=f"run {rec['id']}"))
    if not items:
        return html.Div("No runs yet.", className="field-hint")
    return items


def control_states():
    """The series, the change dates and the option controls, in the order of
    :func:`fit` (and of :func:`submit_from_controls`'s ``controls``)."""
    return [State(ids.SERIES_KEY, "data"), State(ids.CHANGEPOINTS, "data"), State(ids.SEGMENTS, "value"),
            State(ids.FAMILY, "value"), State(ids.WEEKDAY, "value"), State(ids.JUMPS, "value"),
            State(ids.GROWTH_PRIOR, "value"), State(ids.MIN_SEGMENT, "value"), State(ids.DROP_LAST, "value"),
            State(ids.GI_MEAN, "value"), State(ids.GI_SD, "value"), State(ids.HORIZON, "value"),
            State(ids.CHAINS, "value"), State(ids.DRAWS, "value"), State(ids.SEED, "value"),
            State(ids.THIN, "value")]


def register(app):
    controls = control_states()
    app.callback(
        Output(ids.URL, "search", allow_duplicate=True),
        Output(ids.RUN_ID, "data", allow_duplicate=True),
        Output(ids.FIT_ERROR, "children"),
        Input(ids.FIT, "n_clicks"),
        *controls,
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
