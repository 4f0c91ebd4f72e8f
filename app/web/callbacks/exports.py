"""The Export row: links to the shown run's downloads, enabled once it has a result."""

from __future__ import annotations

from dash import Input, Output

from ...store import FINISHED
from .. import ids
from ..context import services, store_guarded
from ..downloads import EXPORT_HINT, EXPORT_IDS, EXPORTS, export_links


def links(run_id, _poll_disabled):
    """(href and className of each export link, then the hint) for the shown run."""
    runs = services().runs
    rec = runs.get(run_id) if run_id else None
    has_result = bool(rec and rec["status"] in FINISHED and runs.result(run_id) is not None)
    hrefs, classes, hint = export_links(run_id, rec, has_result)
    out = []
    for href, cls in zip(hrefs, classes):
        out += [href, cls]
    return out + [hint]


def register(app):
    outputs = []
    for key, _label, _file in EXPORTS:
        outputs += [Output(EXPORT_IDS[key], "href"), Output(EXPORT_IDS[key], "className")]
    n = len(outputs) + 1
    app.callback(
        *outputs,
        Output(EXPORT_HINT, "children"),
        Input(ids.RUN_ID, "data"),
        Input(ids.POLL, "disabled"),  # the run just finished: the poll that saw it stopped the timer
    )(store_guarded(links, n, {n - 1: lambda text: text}))
