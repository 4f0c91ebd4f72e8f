""""How many segments?": start a comparison of K = 1..6, follow it, adopt its advice."""

from __future__ import annotations

from dash import Input, Output, State, dcc, html, no_update

from ...runs import SegmentComparison
from .. import figures as F
from .. import ids
from ..context import get_series, services, store_guarded
from .changes import DEFAULT_SPREAD, date_of
from .running import control_states, named, submit_from_controls

HIDDEN, SHOWN = {"display": "none"}, {}


def start(n_clicks, series_key, _cps, *controls):
    """Start one fit per K with the current options; returns (compare id, poll off, status)."""
    if not n_clicks:
        return no_update, no_update, no_update
    comparison = SegmentComparison(services().runs)
    # tentative change dates fix K, so they are left out here
    rec, message = submit_from_controls(series_key, [], named(controls),
                                        lambda series, opts, user, public: comparison.start(series, opts,
                                                                                            owner=user))
    if rec is None:
        return no_update, no_update, message
    n = len(rec["members"])
    return rec["id"], False, f"Fitting {n} segment counts (tentative change dates are not used here)…"


def follow(_n, compare_id):
    """Progress, then the comparison: (status, chart, adopt label, adopt style, poll off)."""
    if not compare_id:
        return "", [], no_update, HIDDEN, True
    rec, support = SegmentComparison(services().runs).state(compare_id)
    if rec is None:
        return "That comparison no longer exists.", [], no_update, HIDDEN, True
    if rec["status"] == "failed":
        return f"The comparison failed: {rec.get('reason')}", [], no_update, HIDDEN, True
    if support is None:
        return (f"{rec.get('finished', 0)} of {len(rec['members'])} fits done…", no_update, no_update,
                HIDDEN, False)
    best = next((s for s in support if s.get("recommended")), None)
    bad = [str(s["segments"]) for s in support if s.get("feasible") and not s.get("converged")]
    words = (f"The data support {best['segments']} segment{'s' if best['segments'] != 1 else ''}: the "
             "fewest whose PSIS-LOO score is within 4 (or 2 standard errors) of the best converged fit."
             ) if best else "No fit converged, so no segment count can be advised; refit with more draws."
    close = [s for s in support if s.get("elpd_diff") is not None and not s.get("recommended")
             and s["elpd_diff"] < 2 * (s.get("se_diff") or 0) + 4]
    if best and close:
        words += (" Close behind (within the uncertainty): "
                  + ", ".join(f"K = {s['segments']} ({s['elpd_diff']:.1f} ± {s['se_diff']:.1f} below)"
                              for s in close) + ".")
    if bad:
        words += (f" Did not converge, so not scored: K = {', '.join(bad)}; their scores take no part in "
                  "the weights or the advice.")
    skipped = [f"K = {s['segments']} ({s.get('reason')})" for s in support if not s.get("feasible")]
    if skipped:
        words += " Not fitted: " + "; ".join(skipped) + "."
    chart = dcc.Graph(figure=F.support_figure(support), config={"displaylogo": False, "displayModeBar": False})
    label = f"Use {best['segments']} segments" if best else no_update
    return html.Div(words), chart, label, SHOWN if best else HIDDEN, True


def adopt(n_clicks, compare_id, cps, series_key=None):
    """Set the segment count to the recommendation; says what happens to the tentative change dates.

    Change dates set the segment count (one fewer than segments), so they
    are kept when there are as many as the advice needs and removed
    otherwise, and the message names each one removed (with its spread) so
    the analyst can place them again.
    """
    if not n_clicks or not compare_id:
        return no_update, no_update, no_update
    _, support = SegmentComparison(services().runs).state(compare_id)
    best = next((s for s in support or [] if s.get("recommended")), None)
    if best is None:
        return no_update, no_update, no_update
    k = best["segments"]
    cps = [c for c in cps if isinstance(c, dict) and isinstance(c.get("day"), (int, float))
           and isinstance(c.get("spread_days", DEFAULT_SPREAD), (int, float))] if isinstance(cps, list) else []
    n = len(cps)
    if not cps:
        return k, cps, f"Segments set to {k}."
    if n == k - 1:
        return k, cps, (f"Segments set to {k}; your {n} tentative change date{'s are' if n != 1 else ' is'} "
                        "kept (they make that many segments).")
    series, _ = get_series(services().store, series_key)
    named = ", ".join(f"{date_of(series, c['day'])} ± {c.get('spread_days', DEFAULT_SPREAD):g} days"
                      if series is not None else f"day {c['day']:g}" for c in cps)
    return k, [], (f"Segments set to {k}. Removed your {n} tentative change date{'s' if n != 1 else ''} "
                   f"({named}): {k} segments need {k - 1} change date{'s' if k - 1 != 1 else ''}, not {n}. "
                   f"Place {k - 1} again if you want them." if k > 1 else
                   f"Segments set to {k}. Removed your {n} tentative change date{'s' if n != 1 else ''} "
                   f"({named}): one segment has no change date.")


def strip(_n, compare_id):
    """The finished comparison's change probability averaged over K, for the change-date panel."""
    if not compare_id:
        return None
    comparison = SegmentComparison(services().runs)
    rec, support = comparison.state(compare_id)
    if rec is None or support is None:
        return no_update
    averaged = comparison.change_probability(compare_id)
    return dict(averaged, series_hash=rec.get("series_hash")) if averaged else None


def register(app):
    controls = control_states()
    app.callback(
        Output(ids.COMPARE_ID, "data"), Output(ids.COMPARE_POLL, "disabled"),
        Output(ids.COMPARE_STATUS, "children"),
        Input(ids.COMPARE, "n_clicks"), *controls, prevent_initial_call=True,
    )(store_guarded(start, 3, {2: lambda t: t}))
    app.callback(
        Output(ids.COMPARE_STATUS, "children", allow_duplicate=True), Output(ids.COMPARE_FIG, "children"),
        Output(ids.ADOPT, "children"), Output(ids.ADOPT, "style"), Output(ids.COMPARE_POLL, "disabled", allow_duplicate=True),
        Input(ids.COMPARE_POLL, "n_intervals"), State(ids.COMPARE_ID, "data"), prevent_initial_call=True,
    )(store_guarded(follow, 5, {0: lambda t: t}))
    app.callback(
        Output(ids.SEGMENTS, "value", allow_duplicate=True), Output(ids.CHANGEPOINTS, "data", allow_duplicate=True),
        Output(ids.COMPARE_STATUS, "children", allow_duplicate=True),
        Input(ids.ADOPT, "n_clicks"), State(ids.COMPARE_ID, "data"), State(ids.CHANGEPOINTS, "data"),
        State(ids.SERIES_KEY, "data"), prevent_initial_call=True,
    )(store_guarded(adopt, 3, {2: lambda t: t}))
    app.callback(
        Output(ids.COMPARE_STRIP, "data"),
        Input(ids.COMPARE_POLL, "disabled"), State(ids.COMPARE_ID, "data"), prevent_initial_call=True,
    )(store_guarded(strip, 1, {}))
