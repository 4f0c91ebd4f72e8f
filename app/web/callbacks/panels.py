"""The result panels: drawn in full when what they show changes, patched while a run streams.

``render`` rebuilds every panel when the series, the change-date lines, the
display options, the highlighted segment or the run change. ``poll`` runs on
the interval timer while the shown run is unfinished: it reads the run's latest
snapshot from the store and updates the figures in place with ``dash.Patch``
(only data arrays and notes go over the wire), rebuilding a panel only when
its number of traces changed.
"""

from __future__ import annotations

import hashlib
import json
import time

from dash import Input, Output, Patch, State, ctx, html, no_update

from ... import wording
from ...store import FINISHED
from .. import figures as F
from .. import ids
from ..context import current_user, get_series, services, store_guarded
from .. import words as W
from ..layout import CHART_WORDS, POLL_MS, words_id
from ...reports.content import short_status

#: The panels' outputs by name; callbacks build dicts keyed by these names and
#: :func:`_as_list` orders them for Dash.
PANEL_OUTPUTS = {
    "main": (ids.MAIN, "figure"), "hist": (ids.CHANGE_HIST, "figure"), "rates": (ids.RATES, "figure"),
    "trace": (ids.TRACE, "figure"), "trace_options": (ids.TRACE_PARAM, "options"),
    "trace_value": (ids.TRACE_PARAM, "value"), "weekday": (ids.WEEKDAY_FIG, "figure"),
    "residuals": (ids.RESIDUALS, "figure"), "diag_rows": (ids.DIAG_TABLE, "children"),
    "diag_summary": (ids.DIAG_SUMMARY, "children"), "headline": (ids.HEADLINE, "children"),
    "summary": (ids.SUMMARY, "children"), "warnings": (ids.WARNINGS, "children"),
    "progress": (ids.PROGRESS, "children"), "banner": (ids.STATUS_BANNER, "children"),
    "banner_class": (ids.STATUS_BANNER, "className"), "state": (ids.FIGURE_RUN, "data"),
    "poll_off": (ids.POLL, "disabled"), "stop_off": (ids.STOP, "disabled"), "brief_href": (ids.BRIEF_LINK, "href"),
    "brief_class": (ids.BRIEF_LINK, "className"), "poll_ms": (ids.POLL, "interval"),
    "announce": (ids.ANNOUNCER, "children"),
    **{f"words_{key}": (words_id(graph), "children") for graph, key in CHART_WORDS},
    "diag_note": (ids.DIAG_NOTE, "children"),
}
NAMES = tuple(PANEL_OUTPUTS)
CONTROL_NAMES = ("poll_off", "stop_off", "brief_href", "brief_class")


def _as_list(out):
    """A dict of named outputs as Dash's list, ``no_update`` for the names not given."""
    return [out.get(name, no_update) for name in NAMES]


#: Poll period (ms) until a run's first band (the band comes a fraction of a
#: second after Fit; a watcher should see it at once); then the layout's POLL_MS.
FIRST_POLL_MS = 120
#: While a run streams, the change-date, rates and weekday panels are redrawn
#: at most this often (seconds); the main chart and headline follow every
#: snapshot. Each redraw costs the browser 50-400 ms on a loaded 2-core
#: machine, and redrawing all of them on every snapshot made the page fall
#: behind (bench/dashboard.py).
SECONDARY_SECONDS = 1.0


def to_patch(updates):
    """A dash.Patch from a figure-updates dict (see app.web.figures)."""
    p = Patch()
    for i, props in (updates.get("traces") or {}).items():
        for key, value in props.items():
            p["data"][int(i)][key] = value
    for key in ("annotations", "shapes"):
        for i, item in (updates.get(key) or {}).items():
            p["layout"][key][int(i)] = item
    if "title" in updates:
        p["layout"]["title"]["text"] = updates["title"]
    return p


RESULT_PARTS = ("band", "segments", "changepoints", "changepoint_histograms", "current", "projection",
                "weekday", "checks", "spec_resolved")


def _run_view(run_id):
    """(record, view) of the shown run, or (None, None).

    The view is the latest snapshot; once the run has its result, the
    summaries come from the result (all draws), so the dashboard, the
    briefing view and the reports show the same numbers.
    """
    if not run_id:
        return None, None
    svc = services()
    rec = svc.runs.get(run_id)
    if rec is None:
        return None, None
    snap = svc.runs.snapshot(run_id)
    if snap is not None and rec["status"] in FINISHED:
        result = svc.runs.result(run_id)
        if result is not None:
            snap = dict(snap, **{k: result[k] for k in RESULT_PARTS if k in result})
            snap["diagnostics"] = dict(snap.get("diagnostics") or {}, **{
                k: v for k, v in result["diagnostics"].items()
                if k in ("converged", "reportable", "warnings", "rhat_max", "ess_bulk_min", "ess_tail_min",
                         "parameters")})
            snap["summary_text"] = result.get("summary_text")
    return rec, snap


def queue_note(rec):
    """For a queued run on a team server: are any workers connected, and on our version?"""
    svc = services()
    if rec is None or rec["status"] != "queued" or not svc.team or not hasattr(svc.store, "list_workers"):
        return None
    if rec.get("held"):
        return rec.get("reason")
    workers = svc.store.list_workers()
    if not workers:
        return ("Queued: no worker is connected to the team's queue. Start one with "
                "'bendline worker --redis URL'; the run starts as soon as one connects.")
    from ...version import CODE_VERSION

    other = sorted({w.get("version") for w in workers} - {CODE_VERSION})
    if other and not any(w.get("version") == CODE_VERSION for w in workers):
        return (f"Queued, but the connected workers run engine version {', '.join(map(str, other))}, "
                f"not this server's {CODE_VERSION}: update the workers.")
    return f"Queued: waiting for one of {len(workers)} worker{'s' if len(workers) != 1 else ''}."


def announcement(rec, snapshot):
    """What the status live region says: the short status while the run goes on, then the verdict.

    It changes only when the run's state does (queued, running, finished), so
    a screen reader announces "Provisional: still sampling" once and then
    "Reportable: converged ..." or "Not reportable: do not report these
    numbers ...", not every snapshot.
    """
    if rec is None:
        return ""
    if rec["status"] not in FINISHED:
        return short_status(rec["status"], snapshot)[1]
    return wording.status_line(rec, snapshot)[1]


def _items(lines):
    return [html.Li(line) for line in lines]


def words_of(sd, snap, cps=None, trace_param=None, only=None):
    """The charts' text alternatives as list items, by output name (all, or the keys in ``only``)."""
    makers = {
        "main": lambda: W.main_words(sd, snap, cps or []), "hist": lambda: W.changes_words(snap),
        "rates": lambda: W.rates_words(snap), "trace": lambda: W.trace_words(snap, trace_param),
        "weekday": lambda: W.weekday_words(snap), "residuals": lambda: W.residual_words(snap),
    }
    return {f"words_{k}": _items(make()) for k, make in makers.items() if only is None or k in only}


DIAG_COLUMNS = (("parameter", "Quantity"), ("rhat", "R-hat"), ("ess_bulk", "Bulk ESS"), ("ess_tail", "Tail ESS"),
                ("status", "Status"))


def _cell(key, value):
    if value is None:
        return "–"
    if key == "rhat" and isinstance(value, (int, float)):
        return wording.fmt_rhat(value)
    if key.startswith("ess") and isinstance(value, (int, float)):
        return f"{value:,.0f}"
    return str(value)


def diagnostics_table(rows):
    """The convergence table: a plain HTML table (headers in scope, every row shown).

    A plain table, not a DataTable: the DataTable's hidden clipboard input
    held the Tab key (a keyboard trap) and its paging buttons had no names. A
    row whose status is not "ok" says why in its Status cell; its colour only
    repeats that.
    """
    head = html.Thead(html.Tr([html.Th(label, scope="col") for _key, label in DIAG_COLUMNS]))
    body = [html.Tr([html.Td(_cell(key, r.get(key)), className="num" if key in ("rhat", "ess_bulk", "ess_tail")
                             else None) for key, _label in DIAG_COLUMNS],
                    className=None if r.get("status") == "ok" else "problem") for r in rows]
    if not body:
        body = [html.Tr(html.Td("No convergence check yet.", colSpan=len(DIAG_COLUMNS)))]
    return html.Table(className="diag-table", children=[
        html.Caption("Convergence of each quantity", className="visually-hidden"), head, html.Tbody(body)])


def headline_children(snapshot):
    out = []
    for label, value, detail in wording.headline_stats(snapshot):
        out.append(html.Div(className="stat", children=[
            html.Div(label, className="stat-label"), html.Div(value, className="stat-value"),
            html.Div(detail, className="stat-sub"),
        ]))
    return out


def summary_children(rec, snapshot):
    """The plain-language sentence under the headline, hedged while the numbers may not be reported."""
    if not snapshot or not snapshot.get("current"):
        return ""
    live = rec is not None and rec["status"] not in FINISHED
    final = snapshot.get("phase") == "done" and wording.verdict_of(snapshot.get("diagnostics"))[0]
    text = snapshot.get("summary_text") if snapshot.get("phase") == "done" else None
    text = text or wording.summary_sentence(snapshot)
    if live:
        return "Provisional, still sampling: " + text
    return text if final else "Not reportable, do not report: " + text


def warning_children(snapshot):
    """The verdict's warnings in words, beside the numbers (finished runs)."""
    if not snapshot or snapshot.get("phase") != "done":
        return []
    items = []
    for w in ((snapshot.get("diagnostics") or {}).get("warnings") or []):
        if isinstance(w, dict) and w.get("message"):
            blocking = bool(w.get("blocking"))
            items.append(html.Li([html.Strong("Not reportable: " if blocking else "Note: "), w["message"]],
                                 className="blocking" if blocking else "note"))
    return items


def _trace_choice(snapshot, current):
    names = ((snapshot or {}).get("traces") or {}).get("names") or []
    options = [{"label": n, "value": n} for n in names]
    if current in names:
        return options, current
    params = ((snapshot or {}).get("diagnostics") or {}).get("parameters") or []
    worst = max(params, key=lambda p: p.get("rhat") or 0.0, default=None)
    return options, (worst["name"] if worst else (names[0] if names else None))


def _controls_state(rec):
    """(poll disabled, stop disabled, brief href, brief class)."""
    if rec is None:
        return True, True, "#", "btn link-btn disabled"
    user, admin = current_user()
    live = rec["status"] not in FINISHED
    may_stop = admin or rec.get("owner") == user
    return (not live, not (live and may_stop), f"/brief/{rec['id']}", "btn link-btn")


def _state(run_id, snapshot, counts, trace_param, marks=None):
    return {"run": run_id, "iteration": (snapshot or {}).get("iteration"),
            "phase": (snapshot or {}).get("phase"), "counts": counts, "trace_param": trace_param,
            "marks": marks if marks is not None else _marks(snapshot),
            "banded": bool((snapshot or {}).get("band"))}


def _strip_for(series, strip):
    """The comparison's averaged change probability, when it belongs to the shown series."""
    if isinstance(strip, dict) and series is not None and strip.get("series_hash") == series.content_hash():
        return strip
    return None


def render(series_key, cps, style, scale, highlight, run_id, trace_param, strip=None, state=None):
    """Every panel, drawn from scratch.

    Skipped when the only change is the trace picker's value and it is the
    one the poll just chose (``state`` says so): the poll drew that panel.
    """
    if not isinstance(state, dict):
        state = None  # what this callback wrote last; anything else is not ours
    if (state and state.get("run") == run_id and state.get("trace_param") == trace_param
            and ctx.triggered_id == ids.TRACE_PARAM):
        return _as_list({})
    svc = services()
    series, _ = get_series(svc.store, series_key)
    rec, snap = _run_view(run_id)
    if series is None:
        blank = F.empty_figure("Load a series to begin.")
        return _as_list({
            "main": blank, "hist": F.empty_figure(""), "rates": F.empty_figure("No fit yet."),
            "trace": F.empty_figure(""), "trace_options": [], "trace_value": None, "weekday": F.empty_figure(""),
            "residuals": F.empty_figure(""), "diag_rows": diagnostics_table([]), "diag_summary": "", "headline": [], "summary": "",
            "warnings": [], "progress": "", "banner": "", "banner_class": "", "state": None, "poll_off": True,
            "stop_off": True, "brief_href": "#", "brief_class": "btn link-btn disabled", "poll_ms": POLL_MS,
            "announce": "", "diag_note": F.diagnostics_note(None), **words_of(None, None)})
    sd = series.to_dict()
    # a run on another series (e.g. a new file was loaded) is not drawn over this one
    if rec is not None and rec.get("series_hash") != series.content_hash():
        rec, snap = None, None
    if rec is not None and _shows_nothing_yet(state, series_key, run_id, snap):
        return _as_list(_start_run(sd, rec, snap, cps, highlight, run_id, state))
    log_y = scale == "log"
    main = F.main_figure(sd, snap, cps or [], log_y=log_y, style=style, highlight_segment=highlight)
    hist = F.changepoint_figure(sd, snap, highlight_segment=highlight, averaged=_strip_for(series, strip))
    options, trace_param = _trace_choice(snap, trace_param)
    trace = F.trace_figure(snap, trace_param)
    resid = F.residual_figure(snap)
    banner_cls, banner = wording.status_line(rec, snap)
    controls = dict(zip(CONTROL_NAMES, _controls_state(rec)))
    counts = {"hist": len(hist.data), "trace": len(trace.data), "resid": len(resid.data)}
    state = dict(_state(run_id if rec else None, snap, counts, trace_param), series=series_key,
                 controls=list(controls.values()), trace_names=[o["value"] for o in options])
    return _as_list(dict(
        announce=announcement(rec, snap), **words_of(sd, snap, cps, trace_param),
        main=main, hist=hist, rates=F.rates_figure(snap, highlight_segment=highlight), trace=trace,
        trace_options=options, trace_value=trace_param, weekday=F.weekday_figure(snap), residuals=resid,
        diag_rows=diagnostics_table(F.diagnostics_rows(snap)), diag_summary=F.diagnostics_summary(snap) if snap else "",
        diag_note=F.diagnostics_note(snap),
        headline=headline_children(snap), summary=summary_children(rec, snap), warnings=warning_children(snap),
        progress=wording.progress_line(rec, snap), banner=banner, banner_class=f"banner {banner_cls}",
        state=state, poll_ms=FIRST_POLL_MS if rec is not None and not controls["poll_off"] and not state["banded"]
        else POLL_MS, **controls))


def _shows_nothing_yet(state, series_key, run_id, snap):
    """True when a new run was picked while the panels show this series and no run.

    Then nothing but the main chart's status note would change until the run's
    first band, so :func:`render` patches that instead of sending seven new
    figures (which a busy browser takes most of a second to draw).
    """
    if not state or state.get("run") is not None or state.get("series") != series_key or state.get("banded"):
        return False
    if (snap or {}).get("band"):
        return False
    return {t["prop_id"] for t in ctx.triggered} == {f"{ids.RUN_ID}.data"}


def _start_run(sd, rec, snap, cps, highlight, run_id, state):
    """render()'s outputs for a run just started on blank panels (see _shows_nothing_yet)."""
    banner_cls, banner = wording.status_line(rec, snap)
    controls = dict(zip(CONTROL_NAMES, _controls_state(rec)))
    return dict(
        main=to_patch(F.main_updates(sd, snap, cps or [], highlight_segment=highlight)),
        headline=headline_children(snap), summary=summary_children(rec, snap), warnings=[],
        progress=queue_note(rec) or wording.progress_line(rec, snap), banner=banner,
        banner_class=f"banner {banner_cls}", poll_ms=FIRST_POLL_MS, announce=announcement(rec, snap),
        state=dict(state, run=run_id, iteration=(snap or {}).get("iteration"), phase=(snap or {}).get("phase"),
                   controls=list(controls.values())),
        **controls)


def _groups_due(state, old, new, *, finished):
    """(draw the change-date/rates/weekday panels, draw the draws' panels) this poll.

    The draws' panels (traces, residual check, diagnostics) change only at a
    convergence check, the others with every snapshot. While a run streams,
    each group is drawn at most every SECONDARY_SECONDS and never both in one
    poll (the one drawn longer ago goes first); the last poll draws both.
    """
    if finished:
        return True, True
    now = time.time()
    phase_changed = new["phase"] != old.get("phase")
    sec_at, diag_at = state.get("secondary_at") or 0.0, state.get("diag_drawn_at") or 0.0
    secondary = phase_changed or now - sec_at >= SECONDARY_SECONDS
    diag = (new["diag"] != old.get("diag") or phase_changed) and (phase_changed or now - diag_at >= SECONDARY_SECONDS)
    if secondary and diag:
        return (True, False) if sec_at <= diag_at else (False, True)
    return secondary, diag


def _fingerprint(obj):
    return hashlib.md5(json.dumps(obj, sort_keys=True, default=str).encode()).hexdigest()[:12]


def _marks(snapshot):
    """What each secondary panel depends on, so unchanged panels are not redrawn."""
    snap = snapshot or {}
    # what the panel shows, including its empty states ("appear once the first
    # draws arrive" versus "not fitted") and its status badge, not just the numbers
    shown = [bool(snap.get("band")), F.status_note(snapshot)]
    return {
        "segments": _fingerprint([shown, snap.get("segments")]),
        "weekday": _fingerprint([shown, "weekday" in snap, snap.get("weekday")]),
        "diag": (snapshot or {}).get("diagnostics_at_draw"),
        "phase": (snapshot or {}).get("phase"),
    }


def poll(_n, run_id, state, series_key, cps, highlight, trace_param, strip=None):
    """Patch the panels with the run's newest snapshot (no-op when nothing changed).

    The main chart and the headline follow every snapshot. The other panels
    come in two groups, each drawn at most every ``SECONDARY_SECONDS`` and
    never both in one poll (:func:`_groups_due`): the change-date, rates and
    weekday panels (the last two only when what they show changed), and the
    draws' summaries (traces, diagnostics, residual check) after a new
    convergence check. A run's first band goes alone; the poll that sees the
    run finished draws everything.
    """
    rec, snap = _run_view(run_id)
    if rec is None:
        return _as_list({"poll_off": True})
    series, _ = get_series(services().store, series_key)
    state = state or {}
    banner_cls, banner = wording.status_line(rec, snap)
    out = {"progress": queue_note(rec) or wording.progress_line(rec, snap), "banner": banner,
           "banner_class": f"banner {banner_cls}", "announce": announcement(rec, snap)}
    # Controls only when they change: Dash fires every callback listening to an
    # output that is set, even to the same value (the run list and the export
    # links listen to the poll's "disabled").
    controls = list(_controls_state(rec))
    finished = controls[0]
    if controls != state.get("controls"):
        out.update(zip(CONTROL_NAMES, controls))
        out["state"] = dict(state, controls=controls)
    # The poll that sees the run finished is its last: it draws everything,
    # even if it already saw the final snapshot (written just before the
    # status), since the result's summaries replace the snapshot's.
    if series is None or snap is None or state.get("run") != run_id or (
            not finished and snap.get("iteration") == state.get("iteration")
            and snap.get("phase") == state.get("phase")):
        return _as_list(out)
    sd = series.to_dict()
    counts = dict(state.get("counts") or {})
    old, new = state.get("marks") or {}, _marks(snap)
    out["main"] = to_patch(F.main_updates(sd, snap, cps or [], highlight_segment=highlight))
    out["headline"] = headline_children(snap)
    out["summary"] = summary_children(rec, snap)
    out["warnings"] = warning_children(snap)
    out.update(words_of(sd, snap, cps, only=("main",)))
    if snap.get("band") and not state.get("banded") and not finished:
        # The run's first band: send the main chart alone so the browser draws
        # it at once; the other panels follow on the next poll (the state keeps
        # their old marks and no iteration, so that poll redraws them). Not
        # when the run has finished: then this poll is the last.
        out["state"] = dict(state, controls=controls, banded=True, iteration=None, phase=None)
        out["poll_ms"] = POLL_MS
        return _as_list(out)
    draw_secondary, draw_diag = _groups_due(state, old, new, finished=finished)
    secondary_at, diag_drawn_at = state.get("secondary_at"), state.get("diag_drawn_at")
    if draw_secondary:
        secondary_at = time.time()
        averaged = _strip_for(series, strip)
        hist_up = F.changepoint_updates(sd, snap, averaged)
        if hist_up["trace_count"] and hist_up["trace_count"] == counts.get("hist"):
            out["hist"] = to_patch(hist_up)
        else:
            fig = F.changepoint_figure(sd, snap, highlight_segment=highlight, averaged=averaged)
            out["hist"], counts["hist"] = fig, len(fig.data)
        out.update(words_of(sd, snap, only=("hist",)))
        if new["segments"] != old.get("segments"):
            out["rates"] = F.rates_figure(snap, highlight_segment=highlight)
            out.update(words_of(sd, snap, only=("rates",)))
        if new["weekday"] != old.get("weekday"):
            out["weekday"] = F.weekday_figure(snap)
            out.update(words_of(sd, snap, only=("weekday",)))
    else:  # not yet: the marks stay, so a later poll redraws them
        new["segments"], new["weekday"] = old.get("segments"), old.get("weekday")
    param = state.get("trace_param")
    if draw_diag:
        diag_drawn_at = time.time()
        options, param = _trace_choice(snap, trace_param)
        tr_up = F.trace_updates(snap, param)
        if tr_up["trace_count"] and tr_up["trace_count"] == counts.get("trace") and param == state.get("trace_param"):
            out["trace"] = to_patch(tr_up)
        else:
            fig = F.trace_figure(snap, param)
            out["trace"], counts["trace"] = fig, len(fig.data)
        # the picker's value is an input of render(): set it only when it changes
        trace_names = [o["value"] for o in options]
        if trace_names != state.get("trace_names"):
            out["trace_options"] = options
        if param != trace_param:
            out["trace_value"] = param  # render() sees it equals the state's and skips
        res_up = F.residual_updates(snap)
        if res_up["trace_count"] and res_up["trace_count"] == counts.get("resid"):
            out["residuals"] = to_patch(res_up)
        else:
            fig = F.residual_figure(snap)
            out["residuals"], counts["resid"] = fig, len(fig.data)
        out["diag_rows"] = diagnostics_table(F.diagnostics_rows(snap))
        out["diag_summary"] = F.diagnostics_summary(snap)
        out["diag_note"] = F.diagnostics_note(snap)
        out.update(words_of(sd, snap, trace_param=param, only=("trace", "residuals")))
    else:
        trace_names = state.get("trace_names")
        new["diag"], new["phase"] = old.get("diag"), old.get("phase")
    out["state"] = dict(_state(run_id, snap, counts, param, new), controls=controls, trace_names=trace_names,
                        secondary_at=secondary_at, diag_drawn_at=diag_drawn_at)
    return _as_list(out)


def highlight(click, current):
    """Clicking a segment's row in the rates chart highlights it; clicking again clears."""
    points = click.get("points") if isinstance(click, dict) else None
    if not points or not isinstance(points, list) or not isinstance(points[0], dict):
        return no_update
    seg = points[0].get("customdata")
    if isinstance(seg, (list, tuple)):
        seg = seg[0] if seg else None
    if isinstance(seg, bool) or not isinstance(seg, (int, float)) or seg != seg:
        return no_update  # only the rates chart's own segment numbers
    seg = int(seg)
    return None if seg == current else seg


def sync_zoom(relayout):
    """Zooming the main chart's date axis zooms the change-date chart to match."""
    if not isinstance(relayout, dict):
        return no_update
    p = Patch()
    if "xaxis.range[0]" in relayout and "xaxis.range[1]" in relayout:
        p["layout"]["xaxis"]["range"] = [relayout["xaxis.range[0]"], relayout["xaxis.range[1]"]]
        p["layout"]["xaxis"]["autorange"] = False
        return p
    if relayout.get("xaxis.autorange"):
        p["layout"]["xaxis"]["autorange"] = True
        return p
    return no_update


def register(app):
    outs = [Output(c, p) for c, p in PANEL_OUTPUTS.values()]
    n = len(PANEL_OUTPUTS)
    down = {NAMES.index("progress"): lambda t: t, NAMES.index("banner"): lambda t: t,
            NAMES.index("banner_class"): "banner bad"}
    app.callback(
        *outs,
        Input(ids.SERIES_KEY, "data"),
        Input(ids.CHANGEPOINTS, "data"),
        Input(ids.STYLE, "value"),
        Input(ids.SCALE, "value"),
        Input(ids.HIGHLIGHT, "data"),
        Input(ids.RUN_ID, "data"),
        Input(ids.TRACE_PARAM, "value"),
        Input(ids.COMPARE_STRIP, "data"),
        State(ids.FIGURE_RUN, "data"),
    )(store_guarded(render, n, down))
    app.callback(
        *[Output(c, p, allow_duplicate=True) for c, p in PANEL_OUTPUTS.values()],
        Input(ids.POLL, "n_intervals"),
        State(ids.RUN_ID, "data"),
        State(ids.FIGURE_RUN, "data"),
        State(ids.SERIES_KEY, "data"),
        State(ids.CHANGEPOINTS, "data"),
        State(ids.HIGHLIGHT, "data"),
        State(ids.TRACE_PARAM, "value"),
        State(ids.COMPARE_STRIP, "data"),
        prevent_initial_call=True,
    )(store_guarded(poll, n, down))
    app.callback(
        Output(ids.HIGHLIGHT, "data"),
        Input(ids.RATES, "clickData"),
        State(ids.HIGHLIGHT, "data"),
        prevent_initial_call=True,
    )(highlight)
    app.callback(
        Output(ids.CHANGE_HIST, "figure", allow_duplicate=True),
        Input(ids.MAIN, "relayoutData"),
        prevent_initial_call=True,
    )(sync_zoom)
