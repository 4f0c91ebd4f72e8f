"""Request hygiene for every Bendline server: hosts, origins, headers and errors without internals.

* **Host.** A local server answers only requests addressed to the address it
  listens on (a web page on another site cannot rebind its own name to the
  analyst's laptop and read the run list: DNS rebinding).
* **Origin.** A request that changes state (any method but GET and HEAD)
  carrying an ``Origin`` must come from the server's own origin; a
  cookie-signed API write on a team server must also carry the
  ``X-Bendline-Request`` header, which another site cannot send without
  the server's consent. Scripts with an API token are not affected.
* **Headers.** Every answer forbids framing (``frame-ancestors 'none'``,
  ``X-Frame-Options: DENY``), sniffing and referrers to other sites, under a
  content security policy the dashboard works with (Dash and Plotly need
  inline scripts and ``eval``; nothing is loaded from elsewhere).
* **Errors.** A malformed request to Dash's routes gets 400 or 404 with a
  one-line message; anything else unexpected gets a plain 500 page that
  names no path, library or version. The details go to the server's log.
"""

from __future__ import annotations

from urllib.parse import urlsplit

from flask import jsonify, request
from werkzeug.exceptions import HTTPException

CSP = ("default-src 'self'; script-src 'self' 'unsafe-inline' 'unsafe-eval'; style-src 'self' 'unsafe-inline'; "
       "img-src 'self' data: blob:; font-src 'self' data:; connect-src 'self'; worker-src 'self' blob:; "
       "frame-ancestors 'none'; base-uri 'self'; form-action 'self'; object-src 'none'")
LOOPBACK = frozenset({"127.0.0.1", "localhost", "::1", "[::1]"})
SAFE_METHODS = frozenset({"GET", "HEAD", "OPTIONS"})
API_WRITE_HEADER = "X-Bendline-Request"
#: Dash's catch-all routes: the pages themselves are "/" and "/brief/<run id>"
CATCH_ALL = frozenset({"/<path:path>", "/brief/<path:path>", "/brief/", "/board/<path:path>"})


def _host_name(host_header):
    host = (host_header or "").strip().lower()
    if host.startswith("["):  # [::1]:8050
        return host.split("]")[0] + "]"
    return host.rsplit(":", 1)[0] if host.count(":") == 1 else host


def install(server, *, allowed_hosts=None, team=False):
    """Add the checks, headers and error handlers to a Flask server.

    Parameters
    ----------
    server : flask.Flask
    allowed_hosts : set of str, optional
        Host names the server answers; None answers any (a team server behind
        its own proxy, or a local server told to listen on every address).
    team : bool
        Cookie-signed API writes need :data:`API_WRITE_HEADER`.
    """

    @server.before_request
    def check_host_and_origin():
        if allowed_hosts is not None and _host_name(request.host) not in allowed_hosts:
            return _answer(400, "this server answers requests to its own address only")
        if request.method in SAFE_METHODS:
            return None
        origin = request.headers.get("Origin")
        # the host and port, not the scheme: a team server often sits behind an HTTPS proxy
        if origin is not None and urlsplit(origin).netloc.lower() != (request.host or "").lower():
            return _answer(403, "a request from another site was refused")
        if (team and request.path.startswith("/api/") and "Authorization" not in request.headers
                and request.headers.get(API_WRITE_HEADER) is None):
            return _answer(403, f"API writes signed in by cookie need the {API_WRITE_HEADER} header; "
                                "scripts send an API token (Authorization: Bearer ...)")
        return None

    @server.after_request
    def security_headers(response):
        response.headers.setdefault("Content-Security-Policy", CSP)
        response.headers.setdefault("X-Frame-Options", "DENY")
        response.headers.setdefault("X-Content-Type-Options", "nosniff")
        response.headers.setdefault("Referrer-Policy", "same-origin")
        return response

    @server.route("/favicon.ico")
    def favicon():  # browsers ask for it; the pages name Dash's own icon
        return "", 204

    @server.errorhandler(Exception)
    def unexpected(exc):
        if isinstance(exc, HTTPException):
            return exc
        path = request.path
        if "/_dash-component-suites/" in path:
            return _answer(404, "not found")
        if "/_dash-" in path:
            server.logger.warning("a malformed request to %s was refused (%s)", path, type(exc).__name__)
            server.logger.debug("the refused request's error", exc_info=exc)
            return _answer(400, "the request was malformed and was not processed; nothing was changed")
        server.logger.exception("unexpected error on %s", path)
        return _answer(500, "something went wrong on the server; nothing already saved is lost")


def close_catch_alls(server):
    """Answer 404 where Dash would answer any path under its prefix with its page shell.

    Called once every Dash app is on the server. The views are wrapped, not
    checked before the request, so a team server's sign-in still comes first.
    """
    from .pages import NO_SUCH_RUN, message_page

    def not_found(**_kwargs):
        if request.path.startswith("/brief/"):  # a briefing view without a (well-formed) run id
            return message_page("No such run", NO_SUCH_RUN, 404)
        return message_page("No such page", "There is no page at this address. The dashboard is at /, "
                            "a run's briefing view at /brief/<run id>, boards at /board/.", 404)

    for rule in server.url_map.iter_rules():
        if rule.rule in CATCH_ALL:
            server.view_functions[rule.endpoint] = not_found


def _answer(status, message):
    if request.path.startswith("/api/") or "/_dash-" in request.path or request.accept_mimetypes.best == "application/json":
        return jsonify({"error": {"message": message}}), status
    return (f"<!DOCTYPE html><html lang='en'><head><meta charset='utf-8'><title>Bendline</title></head>"
            f"<body><p>{message}</p></body></html>", status)
