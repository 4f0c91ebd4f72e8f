"""Downloads of a run's result: the JSON, the HTML report and the CSV tables.

Routes (``register_downloads``), all ``GET``, each an attachment whose file
name holds the series name (sanitised) and the run id::

    /download/<run id>/result.json
    /download/<run id>/report.html
    /download/<run id>/segments.csv      (also changepoints.csv, band.csv, projection.csv)

A malformed or unknown id, or an unknown file, is a 404 page; a run with no
result yet (queued, running, or ended without draws) a 409 page saying so.
In team mode the sign-in guard covers these routes like every other.
"""

from __future__ import annotations

import json
import re

from flask import Response, current_app

from ..reports import TABLES, csv_tables, html_report
from ..store import FINISHED, valid_run_id
from .context import services
from .pages import NO_SUCH_RUN, message_page

#: (key, label, file) of each export, in the order the dashboard lists them.
EXPORTS = (("report", "Report (HTML)", "report.html"), ("json", "Result (JSON)", "result.json")) + tuple(
    (t, f"{t.capitalize()} (CSV)", f"{t}.csv") for t in TABLES)
FILES = {f for _k, _l, f in EXPORTS}
#: Dashboard ids of the export links (``export-<key>``) and of their row.
EXPORT_ROW = "export-row"
EXPORT_HINT = "export-hint"
EXPORT_IDS = {k: f"export-{k}" for k, _l, _f in EXPORTS}

_SAFE = re.compile(r"[^A-Za-z0-9_.-]+")


def safe_name(name, limit=60):
    """A series name fit for a file name: letters, digits, ``_ . -`` only, no file extension."""
    text = re.sub(r"\.(csv|tsv|txt)$", "", (name or "").strip(), flags=re.IGNORECASE)
    text = _SAFE.sub("_", text).strip("._-")[:limit].strip("._-")
    return text or "series"


def file_name(series_name, run_id, file):
    """'bendline-daily_admissions-0123456789abcdef-report.html'."""
    return f"bendline-{safe_name(series_name)}-{run_id}-{file}"


def download_path(run_id, file):
    return f"/download/{run_id}/{file}"


def export_links(run_id, record, has_result):
    """(hrefs, class names, hint) of the dashboard's export links for one run.

    Pure: ``record`` is the run's record (or None), ``has_result`` whether a
    result is stored.
    """
    enabled = bool(run_id and record is not None and has_result)
    hrefs = [download_path(run_id, f) if enabled else "#" for _k, _l, f in EXPORTS]
    classes = ["btn small link-btn" + ("" if enabled else " disabled") for _ in EXPORTS]
    if enabled:
        ok = record.get("reportable", record.get("converged"))
        hint = "" if ok else "Not reportable: the exports say so and why; do not report these numbers."
    elif record is None:
        hint = "Exports appear once a fit has finished."
    elif record["status"] not in FINISHED:
        hint = "Exports are available once the run finishes."
    else:
        hint = "This run kept no draws, so there is nothing to export."
    return hrefs, classes, hint


def _attachment(body, mimetype, name):
    resp = Response(body, mimetype=mimetype)
    resp.headers["Content-Disposition"] = f'attachment; filename="{name}"'
    resp.headers["X-Content-Type-Options"] = "nosniff"
    resp.headers["Cache-Control"] = "no-store"
    return resp


def download(run_id, file):
    """One export of one run (see the module's docstring for the answers)."""
    if not valid_run_id(run_id) or file not in FILES:
        return message_page("Not found", NO_SUCH_RUN if not valid_run_id(run_id) else
                            "There is no such download. A run offers report.html, result.json and "
                            + ", ".join(f"{t}.csv" for t in TABLES) + ".", 404)
    runs = services().runs
    rec = runs.get(run_id)
    if rec is None:
        return message_page("No such run", NO_SUCH_RUN, 404)
    result = runs.result(run_id) if rec["status"] in FINISHED else None
    if result is None:
        why = ("it is still running; exports are available once it finishes"
               if rec["status"] not in FINISHED else "it ended without keeping any draws")
        return message_page("No result yet", f"This run has no result: {why}.", 409)
    name = rec.get("series_name") or (result.get("series") or {}).get("name")
    try:
        if file == "result.json":
            body = json.dumps(result, indent=1, allow_nan=False) + "\n"
            return _attachment(body, "application/json", file_name(name, run_id, file))
        if file == "report.html":
            return _attachment(html_report(result, run=rec), "text/html", file_name(name, run_id, file))
        table = file[:-4]
        return _attachment(csv_tables(result)[table], "text/csv", file_name(name, run_id, file))
    except ConnectionError:
        raise  # the store went away: the app's handler answers 503
    except Exception:  # never a traceback: log it, say so
        current_app.logger.exception("download %s of run %s failed", file, run_id)
        return message_page("Export failed", "This export could not be made; the problem has been logged. "
                            "The other exports may still work.", 500)


def unknown_download(rest=""):
    """Any other path under /download/ is a 404 page (not the dashboard)."""
    return message_page("Not found", "There is no such download.", 404)


def register_downloads(flask_server):
    """Add the download routes to the dashboard's Flask server."""
    flask_server.add_url_rule("/download/<run_id>/<file>", endpoint="bendline_download", view_func=download,
                              methods=["GET"])
    flask_server.add_url_rule("/download/", endpoint="bendline_download_none", view_func=unknown_download)
    flask_server.add_url_rule("/download/<path:rest>", endpoint="bendline_download_other",
                              view_func=unknown_download)
