"""The Dash dashboard: :func:`create_app` builds it around a set of services."""

from __future__ import annotations

import os

import dash

from .context import ROOT, AppServices, put_series, sample_list

ASSETS = os.path.join(ROOT, "assets")


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
    """
    from inference.reader import read_series

    from . import callbacks, layout

    app = dash.Dash(
        __name__,
        assets_folder=ASSETS,
        title=title,
        update_title=None,
        serve_locally=True,
        suppress_callback_exceptions=True,
    )
    server = app.server
    server.config["BENDLINE"] = services
    server.config["MAX_CONTENT_LENGTH"] = services.max_upload_bytes * 2  # base64 inflates by 4/3
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
    return app
