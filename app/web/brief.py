"""The briefing view: one run, presented to a room (``/brief/<run id>``).

A second Dash app on the dashboard's Flask server (``url_base_pathname
"/brief/"``). No editing controls; large, high-contrast type; the title,
status, headline numbers, summary and main chart fill the first screen at
16:9 and 16:10 sizes, and the segment panel and the cautions-and-assumptions
footer follow below. While the run goes on the view polls once a second and
says it is provisional; once finished it shows the JSON result (all the
draws) and stops polling.

Unknown or malformed ids get a 404 message page from :func:`_page_view`
before Dash loads (the team-mode sign-in guard runs first, as for every
route).
"""

from __future__ import annotations

import dash
from dash import Input, Output, State, ctx, dcc, html, no_update

from .. import wording
from ..reports.content import (BRIEF_CAUTION, about_lines, assumptions_from_options, cautions_of, warnings_of,
                               gi_from_options, hedged_summary, headline, reportable, result_view, short_status,
                               title_text)
from ..store import FINISHED, valid_run_id
from . import figures as F
from . import words as W
from .context import services, store_guarded
from .pages import NO_SUCH_RUN, message_page
from .presenting import BRIEF_NOTE, BRIEF_RATES_SCALE, label_projection, large_main, large_rates, type_scale

PREFIX = "/brief/"
#: Poll interval while the run is unfinished (ms).
POLL_MS = 1000

# component ids (own names: the dashboard's ids module is not shared)
ROOT = "brief-root"
URL = "brief-url"
VIEWPORT = "brief-viewport"  # {"w", "h"} of the window when the view opened
POLL = "brief-poll"
DRAWN = "brief-drawn"
TITLE = "brief-title"
BADGE = "brief-badge"
STATUS = "brief-status"
HEADLINE = "brief-headline"
WARNINGS = "brief-warnings"
SUMMARY = "brief-summary"
MAIN_BOX = "brief-main"
MAIN = "brief-main-chart"
RATES = "brief-rates-chart"
FOOTER = "brief-footer"
MAIN_WORDS = "brief-main-words"  # the charts in words (read by screen readers; app.web.words)
RATES_WORDS = "brief-rates-words"

OUTPUTS = (
    (ROOT, "className"), (TITLE, "children"), (BADGE, "children"), (BADGE, "className"), (STATUS, "children"),
    (WARNINGS, "children"), (HEADLINE, "children"), (HEADLINE, "className"), (SUMMARY, "children"), (MAIN, "figure"), (RATES, "figure"),
    (FOOTER, "children"), (POLL, "disabled"), (DRAWN, "data"), (MAIN_WORDS, "children"), (RATES_WORDS, "children"),
)
MAIN_CONFIG = {"displayModeBar": False, "displaylogo": False, "scrollZoom": False, "responsive": True}
RATES_CONFIG = {"displayModeBar": False, "displaylogo": False}


def run_id_from_path(pathname):
    """The run id of ``/brief/<id>`` (None unless well formed)."""
    if not isinstance(pathname, str) or not pathname.startswith(PREFIX):
        return None
    rid = pathname[len(PREFIX):].strip("/")
    return rid if valid_run_id(rid) else None


# ------------------------------------------------------------------- layout

def layout():
    """The view's fixed frame; :func:`update` fills it in."""
    return html.Div(id=ROOT, className="brief loading", children=[
        dcc.Location(id=URL, refresh=False),
        dcc.Interval(id=POLL, interval=POLL_MS, disabled=False),
        dcc.Store(id=DRAWN, data=None),
        dcc.Store(id=VIEWPORT, data=None),
        html.Div(className="brief-screen", children=[
            html.Header(className="brief-top", children=[
                html.H1(id=TITLE, className="brief-title", children="Loading the run…"),
                html.Div(id=BADGE, className="brief-badge", role="status"),
            ]),
            html.P(id=STATUS, className="brief-status", **{"aria-live": "polite"}),
            html.Div(id=WARNINGS, className="brief-warning-box", **{"aria-live": "polite"}),
            html.Div(id=HEADLINE, className="brief-headline"),
            html.P(id=SUMMARY, className="brief-summary"),
            html.Figure(id=MAIN_BOX, className="brief-main", children=[
                dcc.Graph(id=MAIN, figure=F.empty_figure(""), config=MAIN_CONFIG, responsive=True,
                          style={"height": "100%", "width": "100%"}),
                html.Figcaption(className="visually-hidden", children=[
                    html.Span(W.TITLES["main"]), html.Ul(id=MAIN_WORDS)]),
            ]),
            html.P(BRIEF_CAUTION, className="brief-caution-line"),
        ]),
        html.Section(className="brief-more", children=[
            html.H2("Growth rate by segment", className="brief-h2"),
            html.Figure(className="brief-figure", children=[
                dcc.Graph(id=RATES, figure=F.empty_figure(""), config=RATES_CONFIG, className="brief-rates"),
                html.Figcaption(className="visually-hidden", children=[
                    html.Span(W.TITLES["rates"]), html.Ul(id=RATES_WORDS)]),
            ]),
        ]),
        html.Footer(id=FOOTER, className="brief-footer"),
        html.Div(className="brief-brand", children="Bendline briefing view"),
    ])


# ------------------------------------------------------------- pure content

def _value(text):
    """'+1.1% per day' with its unit in smaller type, so the number itself can be large."""
    number, sep, unit = text.partition(" per ")
    return [number, html.Span(f" per {unit}", className="brief-stat-unit")] if sep else text


def headline_cards(view, withheld):
    cards = [html.Div(className="brief-stat", children=[
        html.Div(label, className="brief-stat-label"), html.Div(_value(value), className="brief-stat-value"),
        html.Div(detail, className="brief-stat-sub"),
    ]) for label, value, detail in headline(view)]
    if withheld and cards:
        cards.insert(0, html.Div(wording.NOT_REPORTABLE, className="brief-stat brief-withheld"))
    return cards


def warning_list(view):
    """The verdict's warnings in words, beside the headline numbers."""
    warns = warnings_of(view)
    if not warns:
        return []
    return html.Ul([html.Li([html.Strong("Not reportable: " if blocking else "Note: "), msg],
                            className="brief-warning " + ("blocking" if blocking else "note"))
                    for _kind, msg, blocking in warns], className="brief-warnings")


def footer(cautions, assumptions, about):
    return [
        html.H2("About these numbers", className="brief-h2"),
        html.Ul([html.Li(c) for c in cautions], className="brief-cautions"),
        html.P([html.Strong("Model and data: "), "; ".join(list(assumptions) + list(about)) + "."],
               className="brief-assumptions"),
    ]


def content(record, view, series, *, result=None, scale=1.0):
    """Every output of the view for one run (pure: no store access).

    Parameters
    ----------
    record : dict
        The run's record.
    view : dict or None
        The result view (finished runs with a result) or the latest
        snapshot (unfinished runs); None before the first snapshot, or when
        the run ended without draws.
    series : Series or None
        The run's input series.
    result : dict, optional
        The JSON result, when the run has one.
    scale : float
        Chart type size relative to the base (see :func:`type_scale`).

    Returns
    -------
    dict
        Output values keyed by ``(component id, property)``.
    """
    status = record["status"]
    live = status not in FINISHED
    final = reportable(result) if result is not None else False
    badge_cls, badge = short_status(status, view)
    _cls, sentence = wording.status_line(record, view or {})  # {}: a running run may have no snapshot yet
    sd = series.to_dict() if series is not None else None
    if sd is None:
        main = F.empty_figure("The run's data could not be read.")
    else:
        main = large_main(label_projection(F.main_figure(sd, view), view,
                                           font_size=round((BRIEF_NOTE - 2) * scale)), scale)
    rates = large_rates(F.rates_figure(view), BRIEF_RATES_SCALE * scale) if view else F.empty_figure(
        "Growth rates appear once the first draws arrive." if live else "This run kept no draws.")
    if result is not None:
        assumptions = result.get("assumptions") or []
        gi, seed, cautions = result.get("generation_interval"), result.get("seed"), cautions_of(result)
    else:
        assumptions = assumptions_from_options(series, record.get("options")) if series is not None else []
        gi, seed, cautions = gi_from_options(record.get("options")), record.get("seed"), cautions_of(None)
    end = record.get("series_end") or (str(series.end) if series is not None else None)
    withheld = not live and not final and bool(view)
    return {
        (ROOT, "className"): f"brief {badge_cls}",
        (TITLE, "children"): title_text(record.get("series_name") or (sd or {}).get("name"), end),
        (BADGE, "children"): badge,
        (BADGE, "className"): f"brief-badge {badge_cls}",
        (STATUS, "children"): sentence,
        (WARNINGS, "children"): [] if live else warning_list(view),
        (HEADLINE, "children"): headline_cards(view, withheld),
        (HEADLINE, "className"): "brief-headline withheld" if withheld else "brief-headline",
        (SUMMARY, "children"): hedged_summary(view, provisional=live, final=final) if view else "",
        (MAIN, "figure"): main,
        (RATES, "figure"): rates,
        (FOOTER, "children"): footer(cautions, assumptions, about_lines(end=end, run_id=record["id"], seed=seed,
                                                                       gi=gi)),
        (POLL, "disabled"): not live,
        (MAIN_WORDS, "children"): [html.Li(t) for t in W.main_words(sd, view)],
        (RATES_WORDS, "children"): [html.Li(t) for t in W.rates_words(view)],
    }


def missing_content():
    """Outputs for a path that names no run."""
    empty = F.empty_figure("")
    return {
        (ROOT, "className"): "brief missing", (TITLE, "children"): "No such run",
        (BADGE, "children"): "", (BADGE, "className"): "brief-badge", (STATUS, "children"): NO_SUCH_RUN,
        (WARNINGS, "children"): [],
        (HEADLINE, "children"): [], (HEADLINE, "className"): "brief-headline", (SUMMARY, "children"): "",
        (MAIN, "figure"): empty, (RATES, "figure"): empty,
        (FOOTER, "children"): footer(cautions_of(None), [], []), (POLL, "disabled"): True,
        (MAIN_WORDS, "children"): [], (RATES_WORDS, "children"): [],
    }


# ------------------------------------------------------------------ callback

def _load(run_id):
    """(record, view, series, result) of a run from the services, or None when there is no such run."""
    svc = services()
    rec = svc.runs.get(run_id) if run_id else None
    if rec is None:
        return None
    series = svc.runs.series(run_id)
    if rec["status"] in FINISHED:
        result = svc.runs.result(run_id)
        return rec, (result_view(result) if result else None), series, result
    return rec, svc.runs.snapshot(run_id), series, None


def update(pathname, _n, viewport, drawn):
    """Redraw the view when the run moved on (a no-op on polls that bring nothing new)."""
    run_id = run_id_from_path(pathname)
    loaded = _load(run_id)
    if loaded is None:
        out = missing_content()
        key = {"run": None}
    else:
        rec, view, series, result = loaded
        key = {"run": run_id, "status": rec["status"], "iteration": (view or {}).get("iteration"),
               "phase": (view or {}).get("phase"), "result": result is not None}
        if ctx.triggered_id == POLL and key == drawn:
            return [no_update] * len(OUTPUTS)
        out = content(rec, view, series, result=result, scale=type_scale(viewport))
    out[(DRAWN, "data")] = key
    return [out[o] for o in OUTPUTS]


def _page_view(app):
    """``/brief/<run id>``: the view's page, or a 404 message page for a bad or unknown id."""

    def brief_page(run_id):
        if not valid_run_id(run_id) or services().runs.get(run_id) is None:
            return message_page("No such run", NO_SUCH_RUN, 404)
        return app.index()

    return brief_page


def create_brief_app(flask_server, services_):
    """Add the briefing view to the dashboard's Flask server.

    Parameters
    ----------
    flask_server : flask.Flask
        ``app.server`` of the dashboard (its config holds the services).
    services_ : AppServices

    Returns
    -------
    dash.Dash
    """
    from . import ASSETS, INDEX_STRING

    flask_server.config.setdefault("BENDLINE", services_)
    app = dash.Dash(
        __name__, server=flask_server, url_base_pathname=PREFIX, assets_folder=ASSETS,
        title="Bendline briefing", update_title=None, serve_locally=True, suppress_callback_exceptions=True,
        index_string=INDEX_STRING,
    )
    app.layout = layout
    app.clientside_callback(  # the window's size, once, so the chart's type suits the screen
        "function(_path) { return {w: window.innerWidth, h: window.innerHeight}; }",
        Output(VIEWPORT, "data"),
        Input(URL, "pathname"),
    )
    app.callback(
        *[Output(c, p) for c, p in OUTPUTS],
        Input(URL, "pathname"),
        Input(POLL, "n_intervals"),
        Input(VIEWPORT, "data"),
        State(DRAWN, "data"),
    )(store_guarded(update, len(OUTPUTS), {OUTPUTS.index((STATUS, "children")): lambda text: text}))
    flask_server.add_url_rule(PREFIX + "<run_id>", endpoint="bendline_brief_page", view_func=_page_view(app))
    return app
