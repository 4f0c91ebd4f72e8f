"""Loading a series (upload, sample, region) or a run (list click, URL)."""

from __future__ import annotations

import hashlib
import os

import numpy as np

from dash import Input, Output, State, ctx, html, no_update

from bendline.inference.errors import InputError
from bendline.inference.reader import list_regions, read_series

from bendline.inference.options import public_options

from .. import ids
from ..context import decode_upload, get_series, put_series, services, store_guarded
from ..controls import NAMES, control_id, controls_from_public
from .changes import DEFAULT_SPREAD

# outputs of load(), in order: then one value per option control (app.web.controls.NAMES)
CONTROL_IDS = tuple(control_id(name) for name in NAMES)
#: How many outputs load() has: eight, the controls, the change-date message.
N_OUTPUTS = 8 + len(CONTROL_IDS) + 1


def controls_from_run(rec, series):
    """Control values (in CONTROL_IDS order) that reproduce a run's options."""
    public = rec.get("spec")
    if not isinstance(public, dict):  # runs stored before the spec was kept
        public = public_options(rec.get("options") or {}, series)
    values = controls_from_public(public)
    return [values[name] for name in NAMES]


def _read(store, data, label, region=None):
    """Series from file bytes; for a long-format file also the regions and raw key."""
    regions = list_regions(data, name=label)
    raw_key = None
    if regions:
        raw_key = "raw-" + hashlib.sha256(data).hexdigest()[:24]
        store.put_upload(raw_key, {"bytes": data, "label": label})
        region = region if region in regions else regions[0]
        series = read_series(data, name=label, region=region)
    else:
        series = read_series(data, name=label)
    return series, regions, region, raw_key


#: The address names the run to show (fit, list click, a shared link, a
#: reload). In the browser, so that when Fit has just set both the address and
#: the run id, the chain stops there at once instead of two server round trips
#: later: the panels' render waits for that chain (it would change their
#: inputs). The server validates the id before any store lookup.
REQUEST_FROM_URL = """
function(search, current) {
    const run = new URLSearchParams(search || "").get("run");
    if (run && run === current) { return window.dash_clientside.no_update; }
    return {"run": run};
}
"""


def carry_change_dates(old, series, cps):
    """(change dates, message): the tentative change dates carried over to a newly loaded series.

    A change date stays on its calendar date when that date falls inside the
    new series (its day offset is counted from the new start); the others
    are removed and the message names them. ``old`` is the series they were
    placed on (None: nothing to carry).
    """
    if old is None or not isinstance(cps, list):
        return [], ""
    kept, dropped = [], []
    for c in cps:
        if not isinstance(c, dict) or not isinstance(c.get("day"), (int, float)) or isinstance(c.get("day"), bool):
            continue
        spread = c.get("spread_days", DEFAULT_SPREAD)
        spread = float(spread) if isinstance(spread, (int, float)) and not isinstance(spread, bool) else DEFAULT_SPREAD
        when = old.start + np.timedelta64(int(round(c["day"])), "D")
        if series.start <= when <= series.end:
            kept.append({"day": float((when - series.start) / np.timedelta64(1, "D")), "spread_days": spread})
        else:
            dropped.append(f"{when} ± {spread:g} days")
    kept.sort(key=lambda c: c["day"])
    if not dropped:
        return kept, ""
    n = len(dropped)
    return kept, (f"{'These tentative change dates fall' if n > 1 else 'This tentative change date falls'} outside "
                  f"the new series ({series.start} to {series.end}) and {'were' if n > 1 else 'was'} removed: "
                  f"{'; '.join(dropped)}.")


def load(contents, sample, region, request, filename, series_key, current_run, cps=None):
    """Load what the analyst asked for; on bad input keep what is on screen.

    A new series (upload, sample, region) keeps the analyst's choices: the
    option controls are left as they are, and the tentative change dates
    that fall inside the new series stay on their dates.

    Returns, in order: series key, change dates, run id, region options,
    region value, region row style, error message, url search, the control
    values (CONTROL_IDS order), then the change-date message.
    """
    out = _load(contents, sample, region, request, filename, series_key, current_run, cps)
    return out if len(out) == N_OUTPUTS else out + [no_update]


def _load(contents, sample, region, request, filename, series_key, current_run, cps):
    svc = services()
    store = svc.store
    trig = ctx.triggered_id
    keep = [no_update] * len(CONTROL_IDS)
    hidden = {"display": "none"}
    try:
        if trig == ids.REQUEST_RUN or (trig is None and (request or {}).get("run")):
            run_id = (request or {}).get("run")
            if not run_id or run_id == current_run:  # e.g. Fit already shows it
                return [no_update] * (8 + len(CONTROL_IDS))
            rec = svc.runs.get(run_id)
            if rec is None:
                msg = "That run does not exist (it may have been deleted)."
                return [no_update] * 6 + [msg, no_update] + keep
            series = svc.runs.series(run_id)
            key = put_series(store, series, label=rec.get("series_name", ""))
            options = rec["options"]
            cps = list(options.get("changepoint_priors") or [])
            return [key, cps, run_id, [], None, hidden, "", no_update] + controls_from_run(rec, series) + [""]
        if trig == ids.UPLOAD:
            data = decode_upload(contents, svc.max_upload_bytes)
            label = os.path.basename(filename or "uploaded file")
            series, regions, region, raw_key = _read(store, data, label)
        elif trig == ids.SAMPLE:
            if not sample or os.path.basename(sample) != sample:
                return [no_update] * (8 + len(CONTROL_IDS))
            path = os.path.join(svc.samples_dir, sample)
            with open(path, "rb") as fh:
                data = fh.read()
            series, regions, region, raw_key = _read(store, data, sample)
        elif trig == ids.REGION:
            _, rec = get_series(store, series_key)
            raw = store.get_upload(rec["raw_key"]) if rec and rec.get("raw_key") else None
            if raw is None:
                return [no_update] * (8 + len(CONTROL_IDS))
            series = read_series(raw["bytes"], name=raw["label"], region=region)
            regions, raw_key = rec["regions"], rec["raw_key"]
        else:
            return [no_update] * (8 + len(CONTROL_IDS))
    except InputError as exc:
        return [no_update] * 6 + [str(exc), no_update] + keep
    except OSError as exc:
        return [no_update] * 6 + [f"Could not read the sample file: {exc}", no_update] + keep
    old_series, _ = get_series(store, series_key)
    key = put_series(store, series, raw_key=raw_key, regions=regions, region=region, label=series.name)
    options = [{"label": r, "value": r} for r in regions]
    style = {} if regions else hidden
    # the analyst's choices stay as they are on a new upload: defaults that depend
    # on the series (weekday, horizon, minimum segment) are "automatic" choices
    kept, note = carry_change_dates(old_series, series, cps)
    return [key, kept, None, options, region, style, "", ""] + keep + [note]


def describe(series_key):
    """Series summary and the data-quality notes beside the chart."""
    series, rec = get_series(services().store, series_key)
    if series is None:
        return "", ""
    unit = "days" if series.interval_days == 1 else "weeks"
    kind = "daily" if series.interval_days == 1 else "weekly"
    observed = int(series.observed.sum())
    info = html.Div([
        html.Strong(series.name or "series"),
        html.Span(f": {series.n} {unit} ({kind}) from {series.start} to {series.end}; "
                  f"{observed} values, total {series.total:,.0f}."),
    ])
    notes = list(series.notes)
    if not notes:
        return info, html.Div("Data quality: no changes were made to the data.", className="note-ok")
    items = [html.Li(f"{n.message}") for n in notes[:50]]
    more = [html.Li(f"... and {len(notes) - 50} more")] if len(notes) > 50 else []
    return info, html.Div([
        html.Div(f"Data quality: {len(notes)} change{'s' if len(notes) != 1 else ''} made to the data",
                 className="note-title"),
        html.Ul(items + more),
    ])


def register(app):
    app.callback(
        Output(ids.SERIES_KEY, "data"),
        Output(ids.CHANGEPOINTS, "data", allow_duplicate=True),
        Output(ids.RUN_ID, "data", allow_duplicate=True),
        Output(ids.REGION, "options"),
        Output(ids.REGION, "value"),
        Output(ids.REGION_ROW, "style"),
        Output(ids.DATA_ERROR, "children"),
        Output(ids.URL, "search", allow_duplicate=True),
        *[Output(c, "value") for c in CONTROL_IDS],
        Output(ids.CHANGE_ERROR, "children", allow_duplicate=True),
        Input(ids.UPLOAD, "contents"),
        Input(ids.SAMPLE, "value"),
        Input(ids.REGION, "value"),
        Input(ids.REQUEST_RUN, "data"),
        State(ids.UPLOAD, "filename"),
        State(ids.SERIES_KEY, "data"),
        State(ids.RUN_ID, "data"),
        State(ids.CHANGEPOINTS, "data"),
        prevent_initial_call="initial_duplicate",
    )(store_guarded(load, N_OUTPUTS, {6: lambda t: t}))
    app.clientside_callback(REQUEST_FROM_URL, Output(ids.REQUEST_RUN, "data"), Input(ids.URL, "search"),
                            State(ids.RUN_ID, "data"))
    app.callback(
        Output(ids.SERIES_INFO, "children"),
        Output(ids.DATA_NOTES, "children"),
        Input(ids.SERIES_KEY, "data"),
    )(store_guarded(describe, 2, {}))

