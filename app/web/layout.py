"""The dashboard's layout: pure functions returning Dash components."""

from __future__ import annotations

from dash import dcc, html

from bendline.inference.result import CAUTIONS
from bendline.inference.snapshots import ESS_MIN, RHAT_MAX

from . import ids
from .controls import controls
from .downloads import EXPORT_HINT, EXPORT_IDS, EXPORT_ROW, EXPORTS
from .figures import diagnostics_note, empty_figure
from .words import TITLES

#: Poll period (ms) of the run panels while a run streams (app.web.callbacks.panels).
POLL_MS = 300

GRAPH_CONFIG = {
    "displaylogo": False,
    "edits": {"shapePosition": True},
    "modeBarButtonsToRemove": ["select2d", "lasso2d", "autoScale2d", "sendDataToCloud", "sendChartToCloud"],
    "toImageButtonOptions": {"format": "png", "scale": 2},
}
#: The side panels keep two modebar buttons (download, reset): every button is a Tab stop.
PLAIN_CONFIG = {"displaylogo": False, "modeBarButtonsToRemove": [
    "select2d", "lasso2d", "sendDataToCloud", "sendChartToCloud", "zoom2d", "pan2d", "zoomIn2d", "zoomOut2d", "autoScale2d"]}


#: Keyboard shortcuts of Fit and Stop (assets/a11y.js), shown in their titles.
FIT_KEYS = "Alt+Shift+F"
STOP_KEYS = "Alt+Shift+S"
#: The charts' "in words" folds: (graph id, words key of app.web.words.TITLES).
CHART_WORDS = ((ids.MAIN, "main"), (ids.CHANGE_HIST, "hist"), (ids.RATES, "rates"), (ids.TRACE, "trace"),
               (ids.WEEKDAY_FIG, "weekday"), (ids.RESIDUALS, "residuals"))


def words_id(graph_id):
    """Id of the list holding a chart's text alternative."""
    return f"{graph_id}-words"


def chart(graph, key):
    """A chart with its text alternative: a fold, "... in words", read by keyboard and screen reader."""
    return html.Figure(className="chart", children=[
        graph,
        html.Details(className="in-words", children=[
            html.Summary(TITLES[key]),
            html.Ul(id=words_id(graph.id), className="words"),
        ]),
    ])


def _field(label, component, hint=None, id_=None):
    target = getattr(component, "id", None)
    children = [html.Label(label, className="field-label", htmlFor=target if isinstance(target, str) else None),
                component]
    if id_:
        children.append(html.Div(hint or "", className="field-hint", id=id_))
    elif hint:
        children.append(html.Div(hint, className="field-hint"))
    return html.Div(children, className="field")


def _number(id_, value, *, min_=None, max_=None, step=None, width="6em"):
    return dcc.Input(id=id_, type="number", value=value, min=min_, max=max_, step=step,
                     debounce=True, style={"width": width}, className="num")


def data_section(samples):
    return html.Details(open=True, className="section", children=[
        html.Summary("1. Data"),
        html.Label("Series file (CSV: a date column and a count column)", htmlFor=ids.UPLOAD,
                   className="field-label"),
        dcc.Upload(
            id=ids.UPLOAD,
            children=html.Div(["Drop a CSV file here, or ", html.Span("choose a file", className="link")]),
            className="upload", multiple=False, max_size=20 * 1024 * 1024,
            accept=".csv,.tsv,.txt,text/csv,text/plain",
        ),
        _field("or open a sample series (invented data)", dcc.Dropdown(
            id=ids.SAMPLE, options=[{"label": label, "value": name} for name, label in samples],
            placeholder="choose a sample", clearable=False)),
        html.Div(id=ids.REGION_ROW, style={"display": "none"}, children=[
            _field("Region", dcc.Dropdown(id=ids.REGION, clearable=False)),
        ]),
        html.Div(id=ids.DATA_ERROR, className="error", role="alert"),
        html.Div(id=ids.SERIES_INFO, className="series-info"),
        html.Div(id=ids.DATA_NOTES, className="notes"),
    ])


def changepoint_section():
    return html.Details(open=True, className="section", children=[
        html.Summary("2. Tentative change dates"),
        html.P("Add a change date with the button, then type its date (YYYY-MM-DD) and spread; or click the "
               "chart to add one and drag a line to move it. Each line centres the prior on that change date; "
               "its spread is the prior's standard deviation in days.", className="help"),
        html.Button("Add change date", id=ids.ADD_CHANGE, className="btn"),
        html.Div(id=ids.CHANGE_ERROR, className="error", role="alert"),
        html.Div(id=ids.CHANGE_LIST, className="change-list"),
        html.Div(className="field", children=[
            html.Label("Segments", htmlFor=ids.SEGMENTS, className="field-label"),
            _number(ids.SEGMENTS, 3, min_=1, max_=12, step=1),
            html.Div("", className="field-hint", id=ids.SEGMENTS_NOTE),
        ]),
        html.Div(className="compare", children=[
            html.Button("How many segments?", id=ids.COMPARE, className="btn", n_clicks=0,
                        title="Fit 1 to 6 segments and compare them by PSIS-LOO"),
            dcc.Store(id=ids.COMPARE_ID, data=None),
            dcc.Store(id=ids.COMPARE_STRIP, data=None),
            dcc.Interval(id=ids.COMPARE_POLL, interval=1500, disabled=True),
            html.Div(id=ids.COMPARE_STATUS, className="field-hint", **{"aria-live": "polite"}),
            html.Div(id=ids.COMPARE_FIG),
            html.Button("Use the recommended number", id=ids.ADOPT, className="btn small", n_clicks=0,
                        style={"display": "none"}),
        ]),
    ])


def model_section():
    return html.Details(open=True, className="section", children=[
        html.Summary("3. Model and priors"),
        *controls("model", exclude=("segments",)),
        html.H4("Projection and reproduction numbers", className="subhead"),
        *controls("projection"),
        html.Div("Reproduction numbers need a generation interval; they depend on the interval assumed.",
                 className="field-hint"),
        html.Details(id=ids.ADVANCED, className="advanced", children=[
            html.Summary("Advanced: sampler settings"),
            html.P(f"The sampler runs until its chains agree: R-hat (how far the chains disagree; 1 is perfect) "
                   f"below {RHAT_MAX:g} and at least {ESS_MIN:g} effective draws (ESS) for every quantity.",
                   className="field-hint"),
            *controls("sampler"),
        ]),
    ])


def export_section():
    """Links to the shown run's downloads (enabled by callbacks/exports.py once it has a result)."""
    return html.Div(id=EXPORT_ROW, className="export-row", children=[
        html.Span("Export", className="export-label"),
        html.Div(className="export-links", children=[
            html.A(label, id=EXPORT_IDS[key], href="#", className="btn small link-btn disabled")
            for key, label, _file in EXPORTS
        ]),
        html.Div(id=EXPORT_HINT, className="field-hint"),
    ])


def run_bar():
    """Fit, Stop and the briefing link: kept in view at the foot of the controls (sticky, assets/bendline.css).

    It follows the model's controls in the page, so Tab reaches Fit right
    after the last of them (and the skip link jumps to it); a refused Fit says
    why right under the buttons.
    """
    return html.Div(className="run-bar", role="group", **{"aria-label": "Run"}, children=[
        html.Div(className="buttons", children=[
            html.Button("Fit", id=ids.FIT, className="btn primary", n_clicks=0,
                        title=f"Fit the model to the series ({FIT_KEYS})", **{"aria-keyshortcuts": FIT_KEYS}),
            html.Button("Stop", id=ids.STOP, className="btn", n_clicks=0, disabled=True,
                        title=f"Stop the running fit, keeping its draws ({STOP_KEYS})",
                        **{"aria-keyshortcuts": STOP_KEYS}),
            html.A("Briefing view", id=ids.BRIEF_LINK, className="btn link-btn disabled", href="#",
                   target="_blank"),
        ]),
        html.Div(id=ids.FIT_ERROR, className="error", role="alert"),
    ])


def run_section():
    return html.Div(className="section run-section", children=[
        export_section(),
        html.Div(id=ids.PROGRESS, className="progress"),
        html.Details(open=True, className="section", children=[
            html.Summary("Runs"),
            html.Div(className="buttons", children=[
                html.Button("Refresh", id=ids.REFRESH_RUNS, className="btn small", n_clicks=0),
                html.Button("Delete the run shown", id=ids.DELETE_RUN, className="btn small", n_clicks=0,
                            title="Delete the run shown and everything kept for it (a running fit is stopped "
                                  "first); its owner or an admin"),
            ]),
            dcc.ConfirmDialog(id=ids.DELETE_CONFIRM,
                              message="Delete the run shown, with its draws and result? This cannot be undone."),
            html.Div(id=ids.DELETE_MESSAGE, className="field-hint", role="status"),
            html.Div(id=ids.RUN_LIST, className="run-list"),
        ]),
    ])


def results_area():
    return html.Div(id=ids.RESULTS, className="results", tabIndex="-1", children=[
        # the one live region of the run's status: what a screen reader announces (queued, running, then
        # the verdict); the banner, progress line and warnings below change with every snapshot and are
        # read on demand, not announced
        html.Div(id=ids.ANNOUNCER, className="visually-hidden", role="status",
                 **{"aria-live": "polite", "aria-atomic": "true"}),
        html.Div(id=ids.STATUS_BANNER, className="banner"),
        # the controls changed since the fit shown (callbacks/stale.py); read on demand, not announced
        html.Div(id=ids.STALE_NOTE, className="stale-note"),
        html.Ul(id=ids.WARNINGS, className="warning-list", **{"aria-label": "Warnings"}),
        html.Div(id=ids.HEADLINE, className="headline"),
        html.P(id=ids.SUMMARY, className="summary-sentence"),
        html.Div(className="toolbar", children=[
            html.Fieldset(className="inline-field", children=[
                html.Legend("Counts as", className="inline-legend"),
                dcc.RadioItems(id=ids.STYLE, value="bars", inline=True, className="radio",
                               options=[{"label": " Bars", "value": "bars"}, {"label": " Points", "value": "points"}]),
            ]),
            html.Fieldset(className="inline-field", children=[
                html.Legend("Scale", className="inline-legend"),
                dcc.RadioItems(id=ids.SCALE, value="linear", inline=True, className="radio",
                               options=[{"label": " Linear", "value": "linear"}, {"label": " Log", "value": "log"}]),
            ]),
        ]),
        chart(dcc.Graph(id=ids.MAIN, figure=empty_figure("Load a series to begin."), config=GRAPH_CONFIG,
                        className="graph main-graph"), "main"),
        chart(dcc.Graph(id=ids.CHANGE_HIST,
                        figure=empty_figure("Change-date distributions appear while the fit runs."),
                        config=PLAIN_CONFIG, className="graph hist-graph"), "hist"),
        html.Div(className="row", children=[
            html.Div(className="col", children=[
                html.H3("Growth rate by segment"),
                chart(dcc.Graph(id=ids.RATES, figure=empty_figure("No fit yet."), config=PLAIN_CONFIG,
                                className="graph"), "rates"),
            ]),
            html.Div(className="col", children=[
                html.H3("Convergence"),
                html.Div(id=ids.DIAG_SUMMARY, className="diag-summary"),
                html.Div(id=ids.DIAG_TABLE, className="diag-table-box"),
                html.P(diagnostics_note(None), id=ids.DIAG_NOTE, className="field-hint diag-note"),
            ]),
        ]),
        html.Div(className="row", children=[
            html.Div(className="col", children=[
                html.H3("Traces"),
                _field("Quantity shown", dcc.Dropdown(id=ids.TRACE_PARAM, clearable=False, placeholder="quantity")),
                chart(dcc.Graph(id=ids.TRACE, figure=empty_figure("Traces appear once sampling starts."),
                                config=PLAIN_CONFIG, className="graph"), "trace"),
            ]),
            html.Div(className="col", children=[
                html.H3("Day-of-week effect"),
                chart(dcc.Graph(id=ids.WEEKDAY_FIG, figure=empty_figure("No fit yet."), config=PLAIN_CONFIG,
                                className="graph"), "weekday"),
            ]),
        ]),
        html.Div(className="row", children=[
            html.Div(className="col wide", children=[
                html.H3("Model check: posterior predictive residuals"),
                chart(dcc.Graph(id=ids.RESIDUALS, figure=empty_figure("No fit yet."), config=PLAIN_CONFIG,
                                className="graph"), "residuals"),
            ]),
        ]),
        html.Footer(className="cautions", children=[html.P(c) for c in CAUTIONS]),
    ])


def page(samples, series_key=None, team_user=None):
    """The whole page.

    Parameters
    ----------
    samples : list of (name, label)
    series_key : str, optional
        Upload key of a series to show at once (``serve --demo``).
    team_user : str, optional
        Signed-in user in team mode (shown with a sign-out link).
    """
    header_right = [html.A("Boards: many series at once", href="/board/", className="link")]
    if team_user:
        header_right += [html.Span(f"Signed in as {team_user}", className="user"),
                         html.A("Sign out", href="/logout", className="link")]
    return html.Div(className="page", children=[
        html.Nav(className="skip-links", **{"aria-label": "Skip links"}, children=[
            html.A("Skip to the Fit button", href=f"#{ids.FIT}", className="skip-link"),
            html.A("Skip to the results", href=f"#{ids.RESULTS}", className="skip-link"),
        ]),
        dcc.Location(id=ids.URL, refresh=False),
        dcc.Store(id=ids.SERIES_KEY, data=series_key),
        dcc.Store(id=ids.CHANGEPOINTS, data=[]),
        dcc.Store(id=ids.RUN_ID, data=None),
        dcc.Store(id=ids.REQUEST_RUN, data=None),
        dcc.Store(id=ids.FIGURE_RUN, data=None),
        dcc.Store(id=ids.HIGHLIGHT, data=None),
        dcc.Interval(id=ids.POLL, interval=POLL_MS, disabled=True),
        html.Header(className="header", children=[
            html.Div(className="brand", children=[html.Span("Bendline", className="logo"),
                                                  html.Span("growth, decline and change dates in count series",
                                                            className="tagline")]),
            html.Div(className="header-right", children=header_right),
        ]),
        html.Div(className="caution-strip", children=(
            "Estimates depend on the model's assumptions and the data's quality. They are no substitute "
            "for epidemiological judgement: defer to your agency's methods and qualified epidemiologists.")),
        html.Main(className="body", children=[
            html.Aside(className="controls", children=[
                data_section(samples), changepoint_section(), model_section(), run_bar(), run_section(),
            ]),
            results_area(),
        ]),
    ])
