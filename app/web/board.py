"""The weekly board (``/board/`` and ``/board/<board id>``): every series of a file at once.

A third Dash app on the dashboard's Flask server. ``/board/`` starts a board:
load a long-format file, name (or accept the guessed) column that names the
series, choose the shared model options (the dashboard's controls, made from
the same option table) and "Fit all". ``/board/<id>`` shows it: progress while
the series fit, then the ranked table (reportable series first, the
unreportable set apart), a small chart per series, "what changed since the
last release", a "New release" upload, and links to open a series in the
dashboard, the board's briefing view, its HTML report and its CSV table.

Flask routes beside it: ``/board/<id>/table.csv``, ``/board/<id>/report.html``
and ``/brief/board/<id>`` (the briefing view, a page that reloads itself
while series still fit).
"""

from __future__ import annotations

import base64
import binascii

import dash
from dash import Input, Output, State, dcc, html, no_update
from flask import Response

from bendline.inference.errors import InputError

from ..boards import BoardService, board_csv, board_view, ranked
from ..reports.board import (ATTENTION_TEXT, DIRECTION_MARK, board_html, chart_alt, change_text, fmt_prob,
                             growth_text, since_text, small_chart_svg, time_cell)
from ..reports.content import BRIEF_CAUTION
from ..runs import QueueUnavailable
from ..store import valid_run_id
from .context import current_user, decode_upload, services, store_guarded
from .controls import controls, legend_id, public_from_controls
from .controls import NAMES as CONTROL_NAMES
from .pages import message_page

PREFIX = "/board/"
POLL_MS = 2000
NO_SUCH_BOARD = "There is no board with this id. Boards are listed at /board/."

URL = "board-url"
POLL = "board-poll"
UPLOAD = "board-upload"
UPLOAD_NAME = "board-upload-name"
BY = "board-by"
FIT_ALL = "board-fit-all"
MESSAGE = "board-message"
NEW_SECTION = "board-new"
VIEW_SECTION = "board-view"
TITLE = "board-title"
STATUS = "board-status"
LINKS = "board-links"
SORT = "board-sort"
TABLES = "board-tables"
CHARTS = "board-charts"
RELEASE_UPLOAD = "board-release-upload"
RELEASE_NAME = "board-release-name"
RELEASE = "board-release"
RELEASE_MESSAGE = "board-release-message"
REFIT = "board-refit"
REFIT_MESSAGE = "board-refit-message"
LIST = "board-list"
SORTS = (("attention", "Needs attention first"), ("growth", "Growth, fastest first"),
         ("name", "Series name"), ("change", "Latest change date, newest first"))


def board_id_from_path(pathname):
    if not isinstance(pathname, str) or not pathname.startswith(PREFIX):
        return None
    rid = pathname[len(PREFIX):].strip("/")
    return rid if valid_run_id(rid) else None


def layout():
    return html.Div(className="board", lang="en", children=[
        dcc.Location(id=URL, refresh="callback-nav"),
        dcc.Interval(id=POLL, interval=POLL_MS, disabled=True),
        html.Header(className="board-top", children=[
            html.A("← Dashboard", href="/", className="board-back"),
            html.H1(id=TITLE, children="Boards: every series of a file at once"),
        ]),
        html.P(BRIEF_CAUTION, className="board-caution"),
        html.Section(id=NEW_SECTION, className="board-new", children=[
            html.H2("New board"),
            html.P("Load a long-format file: one row per date and series, a column naming the series "
                   "(region, age group, setting). Each series is fitted with the same choices."),
            html.Label("File", htmlFor=UPLOAD, className="field-label"),
            dcc.Upload(id=UPLOAD, className="upload", max_size=services_max_bytes(), multiple=False,
                       accept=".csv,.tsv,.txt,text/csv,text/plain",
                       children=html.Div(["Drop a CSV file here, or ", html.Span("choose a file", className="link")])),
            html.Div(id=UPLOAD_NAME, className="muted", role="status"),
            html.Div(className="field", children=[
                html.Label("Column naming the series (blank: guessed from the file)", htmlFor=BY,
                           className="field-label"),
                dcc.Input(id=BY, type="text", placeholder="e.g. region", debounce=False),
            ]),
            html.Fieldset(className="board-options", children=[
                html.Legend("Model choices (shared by every series)"),
                *controls("model"), *controls("projection"),
                html.Details(className="advanced", children=[
                    html.Summary("Sampler settings (advanced)"), *controls("sampler")]),
            ]),
            html.Button("Fit all", id=FIT_ALL, className="btn primary", title="Fit every series of the file"),
            html.Div(id=MESSAGE, className="message", role="alert"),
            html.H2("Boards"),
            html.Ul(id=LIST),
        ]),
        html.Section(id=VIEW_SECTION, className="board-view", hidden=True, children=[
            html.P(id=STATUS, role="status", **{"aria-live": "polite"}),
            html.Nav(id=LINKS, className="board-links", **{"aria-label": "Board exports"}),
            html.Div(className="board-release", children=[
                html.Label("New release of the file", htmlFor=RELEASE_UPLOAD, className="field-label"),
                dcc.Upload(id=RELEASE_UPLOAD, className="upload", multiple=False,
                           accept=".csv,.tsv,.txt,text/csv,text/plain",
                           children=html.Div(["Drop the new file here, or ", html.Span("choose it",
                                                                                        className="link")])),
                html.Span(id=RELEASE_NAME, className="muted"),
                html.Button("Load release and fit again", id=RELEASE, className="btn"),
                html.Div(id=RELEASE_MESSAGE, className="message", role="alert"),
                html.Button("Fit failed or stopped series again", id=REFIT, className="btn",
                            title="A new run, with the board's choices, for every series whose run failed or "
                                  "was stopped (e.g. a worker that was killed)"),
                html.Div(id=REFIT_MESSAGE, className="message", role="status"),
            ]),
            html.Fieldset(className="field radio-field", children=[
                html.Legend("Sort the reportable series by", className="field-label", id=legend_id(SORT)),
                dcc.RadioItems(id=SORT, options=[{"label": f" {t}", "value": v} for v, t in SORTS],
                               value="attention", className="radio"),
            ]),
            html.Div(id=TABLES),
            html.H2("Each series"),
            html.P("Points: counts. Band: the trend's 90% interval; line: its median. Dashed lines: change "
                   "dates, shaded over their 90% interval.", className="muted"),
            html.Div(id=CHARTS, className="board-grid"),
        ]),
    ])


def services_max_bytes():
    try:
        return services().max_upload_bytes
    except RuntimeError:  # outside a request (layout built at start-up)
        return 20 * 1024 * 1024


def _sorted(rows, how):
    good, rest = ranked(rows)
    if how == "growth":
        good.sort(key=lambda r: -(r["growth_pct_median"] if r["growth_pct_median"] is not None else -1e9))
    elif how == "name":
        good.sort(key=lambda r: str(r["series"]))
    elif how == "change":
        good.sort(key=lambda r: r["latest_change_date"] or "", reverse=True)
    return good, rest


def _direction(direction):
    if not direction:
        return "–"
    shape, word, colour = DIRECTION_MARK.get(direction, ("?", direction, "#4D4D4D"))
    return html.Span([html.Span(shape, style={"color": colour}, **{"aria-hidden": "true"}), f" {word}"])


def _table(rows, caption, board_id, apart=False):
    head = html.Tr([html.Th(t, scope="col") for t in (
        "Series", "Direction", "Growth (90% interval)", "Doubling or halving", "P(growing)",
        "Latest change date", "Since the last release", "Verdict and warnings", "Open")])
    body = []
    for r in rows:
        verdict = ("reportable" if r["reportable"] else
                   {"refused": "not fitted", "queued": "waiting", "running": "fitting"}.get(r["status"],
                                                                                           "not reportable"))
        notes = "; ".join(x for x in (r["reason"], r["warnings"]) if x)
        attention = ATTENTION_TEXT.get(r["attention"] or "")
        name_cell = [html.Span(str(r["series"]))]
        if attention:
            name_cell.append(html.Div(attention, className="attention"))
        body.append(html.Tr([
            html.Th(name_cell, scope="row"),
            html.Td(_direction(r["direction"])),
            html.Td(growth_text(r)),
            html.Td(time_cell(r)),
            html.Td(fmt_prob(r["prob_growing"])),
            html.Td(change_text(r) if r["growth_pct_median"] is not None else "–"),
            html.Td(since_text(r)),
            html.Td(verdict + (f": {notes}" if notes else "")),
            html.Td(html.A("Open in the dashboard", href=f"/?run={r['run_id']}") if r["run_id"] else "–"),
        ]))
    return html.Table(className="board-table" + (" apart" if apart else ""), children=[
        html.Caption(caption), html.Thead(head), html.Tbody(body)])


def render(pathname, _n, sort):
    """Show the new-board form or one board (polled while its series fit)."""
    board_id = board_id_from_path(pathname)
    boards = BoardService(services().runs)
    if board_id is None:
        items = [html.Li(html.A(f"{b.get('series_name')} ({len(b.get('releases', []))} release(s), "
                                f"{str(b.get('created_at'))[:16].replace('T', ' ')})", href=f"{PREFIX}{b['id']}"))
                 for b in boards.list()]
        return (False, True, "Boards: every series of a file at once", no_update, no_update, no_update,
                no_update, True, items or [html.Li("No board yet.")])
    board = boards.get(board_id)
    if board is None:
        return (True, False, "No such board", NO_SUCH_BOARD, [], [], [], True, no_update)
    view = board_view(board, services().runs, with_results=True)
    rel = view["releases"][-1]
    finished = sum(1 for r in rel["rows"] if r["status"] not in ("queued", "running"))
    status = (f"Release {rel['index'] + 1} of {len(view['releases'])} ({rel['file_name']}): "
              + ("all series finished." if view["status"] == "finished"
                 else f"fitting, {finished} of {len(rel['rows'])} series finished; numbers are provisional."))
    links = [html.A("Briefing view", href=f"/brief/board/{board_id}"), " · ",
             html.A("Report (HTML)", href=f"{PREFIX}{board_id}/report.html"), " · ",
             html.A("Table (CSV)", href=f"{PREFIX}{board_id}/table.csv"), " · ",
             html.A("New board", href=PREFIX)]
    good, rest = _sorted(rel["rows"], sort if sort in dict(SORTS) else "attention")
    tables = [html.H2("Reportable series")]
    tables.append(_table(good, "Needs attention first: turned since the last release, a new change date, "
                         "growing; then by growth.", board_id) if good else html.P("No series is reportable yet."))
    if rest:
        tables += [html.H2("Not reportable, not fitted or still fitting"),
                   _table(rest, "Set apart: do not report these estimates.", board_id, apart=True)]
    charts = []
    for r in good + rest:
        svg = small_chart_svg(view["results"].get(r["run_id"]), title=chart_alt(r))
        if not svg:
            continue
        src = "data:image/svg+xml;base64," + base64.b64encode(svg.encode()).decode()
        charts.append(html.Figure(className="board-chart", children=[
            html.Img(src=src, alt=chart_alt(r), width=260, height=110),
            html.Figcaption([html.B(str(r["series"])), ": ", _direction(r["direction"]), " ", growth_text(r)]),
        ]))
    return (True, False, f"Board: {view['name']}", status, links, tables, charts,
            view["status"] == "finished", no_update)


RENDER_OUTPUTS = ((NEW_SECTION, "hidden"), (VIEW_SECTION, "hidden"), (TITLE, "children"), (STATUS, "children"),
                  (LINKS, "children"), (TABLES, "children"), (CHARTS, "children"), (POLL, "disabled"),
                  (LIST, "children"))


def _file(contents, filename):
    data = decode_upload(contents, services().max_upload_bytes)
    label = filename if isinstance(filename, str) and filename.strip() else "uploaded file"
    return data, label


def fit_all(n, contents, filename, by, *values):
    """Create a board from the upload and the shared choices; go to its page."""
    if not n:
        return no_update, no_update
    if not contents:
        return no_update, "Choose a file first."
    try:
        data, label = _file(contents, filename)
        spec = public_from_controls(dict(zip(CONTROL_NAMES, values)))
        user, _ = current_user()
        by = by.strip() if isinstance(by, str) and by.strip() else None
        board = BoardService(services().runs).create(data, label, by, spec, owner=user)
    except InputError as exc:
        return no_update, str(exc)
    except QueueUnavailable:
        return no_update, "The fit queue is unavailable; nothing was lost, try again shortly."
    except (binascii.Error, ValueError) as exc:
        return no_update, f"The file could not be read: {exc}"
    return f"{PREFIX}{board['id']}", ""


def _owned_board(pathname, what):
    """(boards, board id, user, None) when the signed-in user may change the board; else a message last."""
    board_id = board_id_from_path(pathname)
    boards = BoardService(services().runs)
    user, admin = current_user()
    try:
        boards.owned(board_id, user, admin, what)
    except KeyError:
        return boards, board_id, user, NO_SUCH_BOARD
    except PermissionError as exc:
        return boards, board_id, user, f"{str(exc)[0].upper()}{str(exc)[1:]}."
    return boards, board_id, user, None


def add_release(n, contents, filename, pathname):
    if not n:
        return no_update, no_update
    if not contents:
        return no_update, "Choose the new release's file first."
    boards, board_id, user, refused = _owned_board(pathname, "add a release")
    if refused:
        return no_update, refused
    try:
        data, label = _file(contents, filename)
        boards.add_release(board_id, data, label, owner=user)
    except InputError as exc:
        return no_update, str(exc)
    except QueueUnavailable:
        return no_update, "The fit queue is unavailable; nothing was lost, try again shortly."
    return False, "Release loaded: every series is being fitted again."


def refit_failed(n, pathname):
    if not n:
        return no_update, no_update
    boards, board_id, user, refused = _owned_board(pathname, "refit its series")
    if refused:
        return no_update, refused
    try:
        done = boards.refit(board_id, owner=user)
    except QueueUnavailable:
        return no_update, "The fit queue is unavailable; nothing was lost, try again shortly."
    if not done:
        return no_update, "No series of the latest release failed or was stopped: nothing to fit again."
    started = [n for n, v in done.items() if valid_run_id(v)]
    refused = [f"{n} ({v})" for n, v in done.items() if not valid_run_id(v)]
    text = f"Fitting again: {', '.join(started)}." if started else ""
    if refused:
        text += f" Not fitted: {'; '.join(refused)}."
    return False, text.strip()


def create_board_app(flask_server, services_):
    from . import ASSETS, INDEX_STRING

    flask_server.config.setdefault("BENDLINE", services_)
    app = dash.Dash(__name__, server=flask_server, url_base_pathname=PREFIX, assets_folder=ASSETS,
                    title="Bendline boards", update_title=None, serve_locally=True,
                    suppress_callback_exceptions=True, index_string=INDEX_STRING)
    app.layout = layout
    app.callback(*[Output(c, p) for c, p in RENDER_OUTPUTS], Input(URL, "pathname"), Input(POLL, "n_intervals"),
                 Input(SORT, "value"))(store_guarded(render, len(RENDER_OUTPUTS),
                                                     {RENDER_OUTPUTS.index((STATUS, "children")): lambda t: t}))
    app.callback(Output(URL, "pathname"), Output(MESSAGE, "children"), Input(FIT_ALL, "n_clicks"),
                 State(UPLOAD, "contents"), State(UPLOAD, "filename"), State(BY, "value"),
                 *[State(name.replace("_", "-"), "value") for name in CONTROL_NAMES],
                 prevent_initial_call=True)(store_guarded(fit_all, 2, {1: lambda t: t}))
    app.callback(Output(POLL, "disabled", allow_duplicate=True), Output(RELEASE_MESSAGE, "children"),
                 Input(RELEASE, "n_clicks"), State(RELEASE_UPLOAD, "contents"), State(RELEASE_UPLOAD, "filename"),
                 State(URL, "pathname"), prevent_initial_call=True)(
        store_guarded(add_release, 2, {1: lambda t: t}))
    app.callback(Output(POLL, "disabled", allow_duplicate=True), Output(REFIT_MESSAGE, "children"),
                 Input(REFIT, "n_clicks"), State(URL, "pathname"), prevent_initial_call=True)(
        store_guarded(refit_failed, 2, {1: lambda t: t}))
    app.clientside_callback("function(name) { return name ? 'Chosen: ' + name : ''; }",
                            Output(UPLOAD_NAME, "children"), Input(UPLOAD, "filename"))
    app.clientside_callback("function(name) { return name ? 'Chosen: ' + name : ''; }",
                            Output(RELEASE_NAME, "children"), Input(RELEASE_UPLOAD, "filename"))

    def board_page(board_id):
        if not valid_run_id(board_id) or BoardService(services().runs).get(board_id) is None:
            return message_page("No such board", NO_SUCH_BOARD, 404)
        return app.index()

    def table_csv(board_id):
        board = BoardService(services().runs).get(board_id) if valid_run_id(board_id) else None
        if board is None:
            return message_page("No such board", NO_SUCH_BOARD, 404)
        text = board_csv(board_view(board, services().runs))
        return _attachment("\ufeff" + text, "text/csv", f"bendline-board-{board_id}.csv")

    def report(board_id):
        board = BoardService(services().runs).get(board_id) if valid_run_id(board_id) else None
        if board is None:
            return message_page("No such board", NO_SUCH_BOARD, 404)
        view = board_view(board, services().runs, with_results=True)
        return _attachment(board_html(view), "text/html", f"bendline-board-{board_id}-report.html")

    def brief(board_id):
        board = BoardService(services().runs).get(board_id) if valid_run_id(board_id) else None
        if board is None:
            return message_page("No such board", NO_SUCH_BOARD, 404)
        view = board_view(board, services().runs, with_results=True)
        page = board_html(view, presenting=True, refresh_seconds=5 if view["status"] == "running" else None)
        return Response(page, mimetype="text/html", headers={"Cache-Control": "no-store"})

    flask_server.add_url_rule(PREFIX + "<board_id>", endpoint="bendline_board_page", view_func=board_page)
    flask_server.add_url_rule(PREFIX + "<board_id>/table.csv", endpoint="bendline_board_csv", view_func=table_csv)
    flask_server.add_url_rule(PREFIX + "<board_id>/report.html", endpoint="bendline_board_report",
                              view_func=report)
    flask_server.add_url_rule("/brief/board/<board_id>", endpoint="bendline_board_brief", view_func=brief)
    return app


def _attachment(text, mimetype, filename):
    return Response(text, mimetype=mimetype, headers={
        "Content-Disposition": f'attachment; filename="{filename}"', "Cache-Control": "no-store"})
