"""The JSON API: submit a count series for fitting, watch the run, read its result.

Endpoints (all under ``/api/v1``, all answering JSON):

* ``POST /runs``: a CSV file and a spec of options; 201 with the run's id.
* ``GET /runs``: the runs, newest first.
* ``GET /runs/<id>``: one run's status, progress and, once finished, its
  JSON result (the same document ``bendline fit`` writes).
* ``POST /runs/<id>/stop``: stop a run (its owner or an admin); 202.
* ``DELETE /runs/<id>``: delete a run and its data (its owner or an admin),
  stopping it first; 200 when gone, 202 while its worker stops.

Input is validated here, at the edge: a bad file, option or request gets a
4xx answer whose ``error`` object says what is wrong and where (file, row,
column, option, value), never a traceback or a server path. Run ids from the
URL are checked with :func:`app.store.valid_run_id` before any store lookup.
"""

from __future__ import annotations

import datetime as _dt
import json
import os
import re

from flask import Blueprint, current_app, jsonify, request
from werkzeug.exceptions import HTTPException

from bendline.inference import reader
from bendline.inference.errors import InputError
from bendline.inference.options import check_public, engine_options

from .runs import QueueUnavailable
from .store import FINISHED, valid_run_id
from .web.context import current_user, services

api = Blueprint("api", __name__, url_prefix="/api/v1")

#: Keys the file reader takes (not model options); allowed at the top level
#: of a JSON request, as form fields, or inside the spec.
LOADER_KEYS = ("region", "date_column", "count_column", "interval")

#: Fields of each entry of ``GET /runs``.
LIST_FIELDS = ("id", "status", "owner", "created_at", "series_name", "segments", "converged", "reportable")

_ISO_DATE = re.compile(r"^\d{4}-\d{2}-\d{2}$")
_NO_SUCH_RUN = "no such run"


class Refused(Exception):
    """A request that cannot be served as sent; becomes a 4xx/5xx JSON answer.

    Parameters
    ----------
    status : int
        HTTP status.
    message : str
        What is wrong and what was expected.
    **where
        ``source``, ``row``, ``column``, ``value``: where the problem is.
    """

    def __init__(self, status, message, **where):
        super().__init__(message)
        self.status = status
        self.body = {"message": message, **where}

    @classmethod
    def from_input_error(cls, exc, status=400, source=None):
        """Wrap an :class:`InputError`, filling its source when it has none."""
        body = exc.to_dict()
        if body.get("source") is None and source is not None:
            body["source"] = source
        refused = cls(status, body.pop("message"))
        refused.body.update(body)
        return refused


def _error(status, message, **where):
    return jsonify({"error": {"message": message, **where}}), status


# --------------------------------------------------------------------------
# Endpoints


@api.post("/runs")
def submit_run():
    """Read the series and options from the request and queue a fit."""
    try:
        data, label, spec, loader = _read_submission()
        spec, loader = _split_loader_keys(spec, loader)
        series = _read_series(data, label, loader)
        options = _options_for_series(spec, series)
        user, _ = current_user()
        try:
            rec = services().runs.submit(series, options, owner=user, spec=check_public(spec))
        except InputError as exc:
            raise Refused.from_input_error(exc, source="spec") from None
    except Refused as exc:
        return jsonify({"error": exc.body}), exc.status
    except QueueUnavailable as exc:  # its text may hold the queue's URL: keep it out of answers and logs
        current_app.logger.warning("API: a run could not be queued (%s)",
                                   type(exc.__cause__ or exc).__name__)
        return _error(503, "the run could not be queued: the fitting queue is not reachable "
                           "right now. Try again in a minute, or ask the server's administrator "
                           "to check that the queue and its workers are running")
    run_id = rec["id"]
    now = services().runs.get(run_id) or rec
    body = {"id": run_id, "status": now["status"], "url": f"/api/v1/runs/{run_id}",
            "view": f"/?run={run_id}"}
    response = jsonify(body)
    response.status_code = 201
    response.headers["Location"] = body["url"]
    return response


@api.get("/runs")
def list_runs():
    """The runs, newest first (``?limit=N``, 1 to 1000, default 200)."""
    text = request.args.get("limit", "200")
    if not re.fullmatch(r"[0-9]{1,4}", text) or not 1 <= int(text) <= 1000:
        return _error(400, f"limit must be a whole number from 1 to 1000, got {text!r}",
                      source="query", column="limit", value=text)
    runs = services().runs.list(int(text))
    return jsonify({"runs": [{k: rec.get(k) for k in LIST_FIELDS} for rec in runs]})


@api.get("/runs/<run_id>")
def get_run(run_id):
    """One run: status, progress, and the JSON result once finished."""
    runs = services().runs
    rec = runs.get(run_id) if valid_run_id(run_id) else None
    if rec is None:
        return _error(404, _NO_SUCH_RUN)
    return jsonify(_run_view(runs, rec))


def _as_owner(run_id, act):
    """``act(runs, user, admin)`` on an existing run, or the 404/403 answer."""
    runs = services().runs
    if not valid_run_id(run_id) or runs.get(run_id) is None:
        return None, _error(404, _NO_SUCH_RUN)
    user, admin = current_user()
    try:
        return act(runs, user, admin), None
    except KeyError:
        return None, _error(404, _NO_SUCH_RUN)
    except PermissionError as exc:
        return None, _error(403, str(exc))


@api.post("/runs/<run_id>/stop")
def stop_run(run_id):
    """Ask a run to stop (its owner or an admin); the draws so far are kept."""
    rec, refused = _as_owner(run_id, lambda runs, user, admin: runs.stop(run_id, user=user, admin=admin))
    if refused:
        return refused
    return jsonify(_run_view(services().runs, rec)), 202


@api.delete("/runs/<run_id>")
def delete_run(run_id):
    """Delete a run and everything stored for it (its owner or an admin); a running one is stopped first.

    200 ``{"deleted": true}`` when it is gone; 202 ``{"deleted": false,
    "status": "deleting"}`` while its worker stops (it then removes it).
    """
    gone, refused = _as_owner(run_id, lambda runs, user, admin: runs.delete(run_id, user=user, admin=admin))
    if refused:
        return refused
    if gone:
        return jsonify({"id": run_id, "deleted": True}), 200
    return jsonify({"id": run_id, "deleted": False, "status": "deleting"}), 202


_NO_SUCH_BOARD = "no such board; board ids are the 16-character ids that POST /api/v1/boards returns"


def _board_submission():
    """(data, label, by, spec, loader) of a board or release request: the file, and ``by`` in the spec."""
    data, label, spec, loader = _read_submission()
    spec, loader = _split_loader_keys(spec, loader)
    loader.pop("region", None)  # a board fits every series: no one region
    by = spec.pop("by", None)
    if by is not None and (not isinstance(by, str) or not by.strip()):
        raise Refused(400, f"'by' must name the column that names the series, got {by!r}",
                      source="spec", column="by")
    try:
        spec = check_public(spec)
    except InputError as exc:
        raise Refused.from_input_error(exc, source="spec") from None
    return data, label, by, spec, loader


def _board_answer(board, status):
    from .boards import api_view, board_view

    body = api_view(board_view(board, services().runs))
    body.update(url=f"/api/v1/boards/{board['id']}", view=f"/board/{board['id']}")
    response = jsonify(body)
    response.status_code = status
    response.headers["Location"] = body["url"]
    return response


def _as_board_owner(board_id, what):
    """(BoardService, user, None) when the signed-in user may ``what`` the board; else the 404/403 answer last."""
    from .boards import BoardService

    boards = BoardService(services().runs)
    user, admin = current_user()
    try:
        boards.owned(board_id if valid_run_id(board_id) else None, user, admin, what)
    except KeyError:
        return boards, user, _error(404, _NO_SUCH_BOARD)
    except PermissionError as exc:
        return boards, user, _error(403, str(exc))
    return boards, user, None


@api.post("/boards")
def create_board():
    """A board from a long-format file: every series fitted; ``spec`` holds ``by`` and the fit options."""
    from .boards import BoardService

    try:
        data, label, by, spec, loader = _board_submission()
        user, _ = current_user()
        try:
            board = BoardService(services().runs).create(data, label, by, spec, owner=user, loader=loader)
        except InputError as exc:
            raise Refused.from_input_error(exc, source=label) from None
    except Refused as exc:
        return jsonify({"error": exc.body}), exc.status
    except QueueUnavailable:
        return _error(503, "the board could not be queued: the fitting queue is not reachable right now")
    return _board_answer(board, 201)


@api.get("/boards")
def list_boards():
    from .boards import BoardService

    return jsonify({"boards": [{"id": b["id"], "name": b.get("series_name"), "owner": b.get("owner"),
                                "created_at": b.get("created_at"), "releases": len(b.get("releases", []))}
                               for b in BoardService(services().runs).list()]})


@api.get("/boards/<board_id>")
def get_board(board_id):
    from .boards import BoardService

    board = BoardService(services().runs).get(board_id) if valid_run_id(board_id) else None
    if board is None:
        return _error(404, _NO_SUCH_BOARD)
    return _board_answer(board, 200)


@api.post("/boards/<board_id>/releases")
def add_release(board_id):
    """The next release of a board's file (its owner or an admin): every series is fitted again."""
    boards, user, refused = _as_board_owner(board_id, "add a release")
    if refused:
        return refused
    try:
        data, label, _by, _spec, _loader = _board_submission()  # the board's own by and spec are kept
        try:
            board = boards.add_release(board_id, data, label, owner=user)
        except InputError as exc:
            raise Refused.from_input_error(exc, source=label) from None
    except Refused as exc:
        return jsonify({"error": exc.body}), exc.status
    except QueueUnavailable:
        return _error(503, "the release could not be queued: the fitting queue is not reachable right now")
    return _board_answer(board, 201)


@api.post("/boards/<board_id>/refit")
def refit_board_series(board_id):
    """Fit series of a board's latest release again (its owner or an admin).

    JSON body, optional: ``{"series": [names], "spec": {options}}``; by
    default every series whose run failed or was stopped, with the board's
    own choices (``spec`` overrides them for these runs only).
    """
    boards, user, refused = _as_board_owner(board_id, "refit its series")
    if refused:
        return refused
    body = request.get_json(silent=True) if request.get_data(cache=True) else {}
    if not isinstance(body, dict):
        return _error(400, 'expected a JSON object such as {"series": ["North"], "spec": {"max_seconds": 900}}',
                      source="request")
    names, spec = body.get("series"), body.get("spec") or {}
    if names is not None and (not isinstance(names, list) or not all(isinstance(n, str) for n in names)):
        return _error(400, "'series' must be a list of series names", source="request", column="series")
    if not isinstance(spec, dict) or "by" in spec:
        return _error(400, "'spec' must be an object of fit options (the board's 'by' cannot change)",
                      source="request", column="spec")
    try:
        done = boards.refit(board_id, names, spec, owner=user)
    except InputError as exc:
        return jsonify({"error": Refused.from_input_error(exc, source="spec").body}), 400
    except QueueUnavailable:
        return _error(503, "the runs could not be queued: the fitting queue is not reachable right now")
    response = _board_answer(boards.get(board_id), 202)
    body = response.get_json()
    body["refit"] = done
    return jsonify(body), 202


@api.route("/", defaults={"rest": ""}, methods=["GET", "POST", "PUT", "PATCH", "DELETE"])
@api.route("/<path:rest>", methods=["GET", "POST", "PUT", "PATCH", "DELETE"])
def unknown_endpoint(rest):
    """Anything else under /api/v1 is a JSON 404 (not the dashboard's page),
    or a 405 for a known path asked with the wrong method."""
    if rest == "runs":
        return _wrong_method("GET, POST")
    if re.fullmatch(r"runs/[^/]+", rest):
        return _wrong_method("GET, DELETE")
    if re.fullmatch(r"runs/[^/]+/stop", rest):
        return _wrong_method("POST")
    if rest.startswith("runs/"):  # an id holding a slash: never a run
        return _error(404, _NO_SUCH_RUN)
    if rest == "boards":
        return _wrong_method("GET, POST")
    if re.fullmatch(r"boards/[^/]+", rest):
        return _wrong_method("GET")
    if re.fullmatch(r"boards/[^/]+/(releases|refit)", rest):
        return _wrong_method("POST")
    if rest.startswith("boards/"):
        return _error(404, _NO_SUCH_BOARD)
    return _error(404, "no such endpoint; the API has /api/v1/runs, /api/v1/runs/<id>, /api/v1/boards and "
                       "/api/v1/boards/<id>")


def _wrong_method(allowed):
    response, status = _error(405, f"method {request.method} is not allowed here; use {allowed}")
    response.headers["Allow"] = allowed
    return response, status


@api.errorhandler(Exception)
def _unexpected(exc):
    """Errors inside the API never leak a traceback or a path."""
    if isinstance(exc, HTTPException):
        return _http_error(exc)
    if isinstance(exc, ConnectionError):  # the run store (Redis) is unreachable: say so at once
        return _error(503, "the run store and queue are unavailable; nothing saved is lost, try again shortly")
    current_app.logger.exception("API: internal error")
    return _error(500, "internal error while handling the request; it has been logged. "
                       "Please report it with what you sent")


def _http_error(exc):
    messages = {
        404: "no such endpoint; the API has /api/v1/runs and /api/v1/runs/<id>",
        405: f"method {request.method} is not allowed here",
        413: f"the request is too large; files may be at most "
             f"{reader.limits.MAX_BYTES // (1024 * 1024)} MB",
    }
    message = messages.get(exc.code, exc.name.lower() if exc.name else "the request was refused")
    return _error(exc.code or 500, message)


def register_api(flask_app):
    """Add the API to a Flask app (the dashboard's ``app.server``).

    Also makes HTTP errors on ``/api/`` paths answer JSON (routing errors
    such as 405 happen before the blueprint is known), and caps request
    bodies when the app sets no cap.

    Parameters
    ----------
    flask_app : flask.Flask
        Its config must hold the ``AppServices`` (as :func:`app.web.create_app`
        leaves it).
    """
    flask_app.register_blueprint(api)
    if not flask_app.config.get("MAX_CONTENT_LENGTH"):
        flask_app.config["MAX_CONTENT_LENGTH"] = 2 * reader.limits.MAX_BYTES + 1024 * 1024

    def http_error(exc):
        if request.path.startswith(api.url_prefix + "/") or request.path == api.url_prefix:
            return _http_error(exc)
        return exc

    flask_app.register_error_handler(HTTPException, http_error)


# --------------------------------------------------------------------------
# Reading a submission


def _read_submission():
    """(file bytes, file label, spec, loader options) from a JSON or multipart request."""
    if request.mimetype == "application/json" or request.is_json:
        return _read_json_submission()
    if request.mimetype == "multipart/form-data":
        return _read_form_submission()
    raise Refused(415, f"send the CSV and spec as JSON (Content-Type: application/json) or as a "
                       f"multipart form with fields 'file' and 'spec'; got Content-Type "
                       f"{request.mimetype or 'none'!r}", source="request")


def _read_json_submission():
    raw = request.get_data(cache=False)
    try:
        body = json.loads(raw)
    except (ValueError, RecursionError) as exc:  # RecursionError: absurdly deep nesting
        where = f" (line {exc.lineno}, column {exc.colno})" if hasattr(exc, "lineno") else ""
        raise Refused(400, f"the request body is not valid JSON{where}; expected an object "
                           '{"csv": "...", "spec": {...}}', source="request") from None
    if not isinstance(body, dict):
        raise Refused(400, f"expected a JSON object with 'csv' and 'spec', got a "
                           f"{_json_type(body)}", source="request")
    unknown = sorted(set(body) - {"csv", "spec", *LOADER_KEYS})
    if unknown:
        raise Refused(400, f"unknown field(s) {', '.join(map(repr, unknown))}; the request takes "
                           f"csv, spec, {', '.join(LOADER_KEYS)}", source="request",
                      column=unknown[0])
    text = body.get("csv")
    if not isinstance(text, str):
        raise Refused(400, "field 'csv' must hold the text of the CSV file as a string, got "
                           f"{_json_type(text)}", source="request", column="csv")
    data = text.encode("utf-8", errors="surrogatepass")
    _check_size(len(data))
    spec = body.get("spec", {})
    if not isinstance(spec, dict):
        raise Refused(400, f"field 'spec' must be a JSON object of options, got {_json_type(spec)}",
                      source="request", column="spec")
    loader = {k: body[k] for k in LOADER_KEYS if k in body}
    return data, "uploaded file", spec, loader


def _read_form_submission():
    form, files = request.form, request.files
    unknown = sorted((set(form) | set(files)) - {"file", "spec", *LOADER_KEYS})
    if unknown:
        raise Refused(400, f"unknown form field(s) {', '.join(map(repr, unknown))}; the form takes "
                           f"file, spec, {', '.join(LOADER_KEYS)}", source="request",
                      column=unknown[0])
    upload = files.get("file")
    if upload is None:
        raise Refused(400, "the form has no field 'file'; attach the CSV file as 'file'",
                      source="request", column="file")
    data = upload.read(reader.limits.MAX_BYTES + 1)  # one byte more tells "too large"
    _check_size(len(data), exact=len(data) <= reader.limits.MAX_BYTES)
    label = _file_label(upload.filename)
    spec_text = form.get("spec", "")
    if spec_text.strip():
        try:
            spec = json.loads(spec_text)
        except (ValueError, RecursionError) as exc:
            where = f" (line {exc.lineno}, column {exc.colno})" if hasattr(exc, "lineno") else ""
            raise Refused(400, f"field 'spec' is not valid JSON{where}; expected an object of "
                               'options such as {"segments": 3}', source="request",
                          column="spec") from None
        if not isinstance(spec, dict):
            raise Refused(400, f"field 'spec' must be a JSON object of options, got "
                               f"{_json_type(spec)}", source="request", column="spec")
    else:
        spec = {}
    loader = {k: form[k] for k in LOADER_KEYS if form.get(k, "").strip()}
    return data, label, spec, loader


def _check_size(n_bytes, exact=True):
    """413 when the file is over :data:`inference.reader.limits.MAX_BYTES`.

    ``exact`` is False when only the first ``MAX_BYTES + 1`` bytes were read.
    """
    limit = reader.limits.MAX_BYTES
    if n_bytes > limit:
        size = f"{n_bytes / 1024 / 1024:.1f} MB ({n_bytes:,} bytes), " if exact else ""
        raise Refused(413, f"the file is {size}over the limit of {limit / 1024 / 1024:g} MB "
                           f"({limit:,} bytes); keep only the columns and the period you need, "
                           "or split the file by region", source="file")


def _file_label(filename):
    """The uploaded file's own name (no folders), for messages."""
    name = os.path.basename(str(filename or "").replace("\\", "/")).strip()
    name = "".join(ch for ch in name if ch.isprintable())[:120]
    return name or "uploaded file"


def _json_type(value):
    return {dict: "object", list: "list", str: "string", bool: "true/false", type(None): "null",
            int: "number", float: "number"}.get(type(value), type(value).__name__)


def _read_series(data, label, loader):
    try:
        return reader.read_series(data, name=label, **loader)
    except InputError as exc:
        raise Refused.from_input_error(exc, source=label) from None


def _split_loader_keys(spec, loader):
    """Move the reader's keys out of the spec; refuse two different values for one key."""
    spec = dict(spec)
    merged = {}
    for key in LOADER_KEYS:
        given = [v for v in (loader.get(key), spec.pop(key, None)) if v is not None]
        if len(set(map(str, given))) > 1:
            raise Refused(400, f"{key} is given twice with different values ({given[0]!r} and "
                               f"{given[1]!r}); give it once", source="spec", column=key)
        if given:
            if not isinstance(given[0], str):
                raise Refused(400, f"{key} must be a string, got {_json_type(given[0])}",
                              source="spec", column=key, value=str(given[0]))
            merged[key] = given[0]
    return spec, merged


def _options_for_series(spec, series):
    """The engine's options from the spec (public option names, coerced and checked by the option table)."""
    try:
        return engine_options(spec, series)
    except InputError as exc:
        raise Refused.from_input_error(exc, source="spec") from None

def _run_view(runs, rec):
    """What ``GET /runs/<id>`` answers for a run record."""
    run_id = rec["id"]
    snap = runs.snapshot(run_id)
    progress = None
    if snap is not None:
        diag = snap.get("diagnostics") or {}
        ess = [v for v in (diag.get("ess_bulk_min"), diag.get("ess_tail_min")) if v is not None]
        progress = {
            "phase": snap.get("phase"),
            "draws_per_chain": snap.get("draws_per_chain"),
            "rhat_max": diag.get("rhat_max"),
            "ess_min": min(ess) if ess else None,
        }
    result = runs.result(run_id) if rec["status"] in FINISHED else None
    return {
        "id": run_id,
        "status": rec["status"],
        "reason": rec.get("reason"),
        "owner": rec.get("owner"),
        "created_at": rec.get("created_at"),
        "progress": progress,
        "result": result,
    }
