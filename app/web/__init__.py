"""The Dash dashboard: :func:`create_app` builds it around a set of services."""

from __future__ import annotations

import html
import os

import dash

from .context import ROOT, AppServices, put_series, sample_list

ASSETS = os.path.join(ROOT, "assets")

#: Dash's page frame with the page's language set (WCAG 3.1.1: a screen reader
#: picks its voice and pronunciation from it); used by the dashboard and the
#: briefing view.
INDEX_STRING = """<!DOCTYPE html>
<html lang="en">
    <head>
        {%metas%}
        <title>{%title%}</title>
        {%favicon%}
        {%css%}
    </head>
    <body>
        {%app_entry%}
        <footer>
            {%config%}
            {%scripts%}
            {%renderer%}
        </footer>
    </body>
</html>"""


def _store_down(exc):
    """An unreachable run store (Redis) answers 503 at once, in words, for pages and scripts."""
    from flask import jsonify, request

    # the error's own text may name the store's address: it goes to the log, not to the visitor
    from flask import current_app

    current_app.logger.warning("the run store is unavailable (%s)", type(exc).__name__)
    runs = getattr(current_app.config.get("BENDLINE"), "runs", None)
    if runs is not None:
        runs.store_unreachable()
    message = "The run store and queue are unavailable. Nothing already saved is lost; try again in a moment."
    if request.path.startswith(("/api/", "/_dash-")) or request.accept_mimetypes.best == "application/json":
        return jsonify({"error": {"message": message}}), 503
    page = ("<!DOCTYPE html><html lang='en'><head><meta charset='utf-8'><title>Bendline: unavailable</title>"
            "<meta http-equiv='refresh' content='5'><link rel='stylesheet' href='/assets/bendline.css'></head>"
            f"<body><div class='login-page'><div class='login-box'><div class='logo'>Bendline</div>"
            f"<div class='error' role='alert'>{html.escape(message)}</div>"
            "<p class='help'>This page reloads every 5 seconds.</p></div></div></body></html>")
    return page, 503


def create_app(services: AppServices, *, demo_sample=None, title="Bendline"):
    """Build the Dash app.

    Parameters
    ----------
    services : AppServices
        Run service and store the callbacks use (kept in the Flask config,
        never in module globals).
    demo_sample : str, optional
        File name of a sample series to show when the page opens.
    title : str

    Returns
    -------
    dash.Dash
        The dashboard; the briefing view (``/brief/<run id>``, a second Dash
        app) and the downloads (``/download/<run id>/...``) are added to the
        same Flask server.
    """
    from bendline.inference.reader import read_series

    from . import callbacks, layout, security
    from .brief import create_brief_app
    from .downloads import register_downloads

    app = dash.Dash(
        __name__,
        assets_folder=ASSETS,
        title=title,
        update_title=None,
        serve_locally=True,
        suppress_callback_exceptions=True,
        index_string=INDEX_STRING,
    )
    server = app.server
    server.config["BENDLINE"] = services
    server.config["MAX_CONTENT_LENGTH"] = services.max_upload_bytes * 2  # base64 inflates by 4/3
    server.register_error_handler(ConnectionError, _store_down)
    security.install(server, allowed_hosts=services.allowed_hosts, team=services.team)
    samples = sample_list(services.samples_dir)
    demo_key = None
    if demo_sample:
        series = read_series(os.path.join(services.samples_dir, demo_sample))
        demo_key = put_series(services.store, series, label=series.name)

    def serve_layout():
        from .context import current_user

        user = current_user()[0] if services.team else None
        return layout.page(samples, series_key=demo_key, team_user=user)

    app.layout = serve_layout
    callbacks.register(app)
    register_downloads(server)
    app.brief_app = create_brief_app(server, services)  # kept for tests that walk its callbacks
    from .board import create_board_app

    app.board_app = create_board_app(server, services)
    security.close_catch_alls(server)
    return app
