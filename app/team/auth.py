"""Sign-in for the team server: a sign-in page, a session cookie, one guard for every route.

Every route except the sign-in page and static assets (the app's CSS and
Dash's component scripts) refuses an unauthenticated request: the page,
Dash's layout, dependency and callback routes, the JSON API, briefing views
and downloads. Browsers sign in through the page and carry a signed session
cookie (HttpOnly, SameSite=Lax, Secure unless switched off for plain-HTTP
test setups); scripts send ``Authorization: Bearer TOKEN``. Passwords are
kept only as salted hashes (werkzeug); repeated failed sign-ins are slowed
down per name and per address.
"""

from __future__ import annotations

import datetime as _dt
import html
import secrets

from urllib.parse import urlsplit

from flask import g, jsonify, redirect, request, session

PUBLIC_PREFIXES = ("/assets/", "/_dash-component-suites/")
PUBLIC_PATHS = frozenset({"/login", "/_favicon.ico", "/favicon.ico"})


def _safe_next(target):
    """Only same-site paths are followed after sign-in.

    The path is normalised as a browser would read it first (browsers drop
    tabs and line breaks from URLs, so ``/\t/evil.example`` is
    ``//evil.example``): it must then start with a single ``/``, hold no
    backslash, and name no scheme or host.
    """
    if not isinstance(target, str):
        return "/"
    cleaned = "".join(ch for ch in target if ch >= " " and ch != "\x7f").strip()
    if not cleaned.startswith("/") or cleaned.startswith("//") or "\\" in cleaned:
        return "/"
    parts = urlsplit(cleaned)
    if parts.scheme or parts.netloc:
        return "/"
    return cleaned


def login_page(message="", next_path="/", name=""):
    # one token per session: a second GET (another tab, a favicon redirect)
    # must not invalidate a form already on screen
    token = session.get("login_csrf") or secrets.token_urlsafe(16)
    session["login_csrf"] = token
    msg = f'<div class="error" role="alert">{html.escape(message)}</div>' if message else ""
    return f"""<!DOCTYPE html>
<html lang="en"><head><meta charset="utf-8"><title>Sign in · Bendline</title>
<meta name="viewport" content="width=device-width, initial-scale=1">
<link rel="icon" href="/_favicon.ico"><link rel="stylesheet" href="/assets/bendline.css"></head>
<body><div class="login-page">
<form method="post" action="/login" class="login-box">
<div class="logo">Bendline</div>
<p class="help">Sign in to your team's server.</p>
{msg}
<input type="hidden" name="csrf" value="{token}">
<input type="hidden" name="next" value="{html.escape(_safe_next(next_path))}">
<label class="field-label" for="name">Name</label>
<input id="name" name="name" autocomplete="username" required value="{html.escape(name)}" class="num wide">
<label class="field-label" for="password">Password</label>
<input id="password" name="password" type="password" autocomplete="current-password" required class="num wide">
<button class="btn primary" type="submit">Sign in</button>
</form></div></body></html>"""


def install(flask_app, users, *, cookie_secure=True, session_hours=12):
    """Add the sign-in routes and the guard to a Flask app.

    Parameters
    ----------
    flask_app : flask.Flask
    users : app.team.users.UserStore
    cookie_secure : bool
        Mark the session cookie Secure (HTTPS only). Switch off only for a
        plain-HTTP setup inside a trusted network or for tests.
    session_hours : float
    """
    flask_app.secret_key = users.get_secret_key()
    flask_app.config.update(
        SESSION_COOKIE_HTTPONLY=True,
        SESSION_COOKIE_SAMESITE="Lax",
        SESSION_COOKIE_SECURE=bool(cookie_secure),
        SESSION_COOKIE_NAME="bendline_session",
        PERMANENT_SESSION_LIFETIME=_dt.timedelta(hours=session_hours),
    )

    @flask_app.before_request
    def guard():
        path = request.path
        if path in PUBLIC_PATHS or path.startswith(PUBLIC_PREFIXES):
            return None
        user = None
        header = request.headers.get("Authorization", "")
        if header.startswith("Bearer "):
            user = users.user_for_token(header[7:].strip())
        elif session.get("user"):
            user = users.get(session["user"])
            if user is None or not users.session_valid(session["user"], session.get("sid")):
                user = None
                session.clear()  # signed out elsewhere, or the account was removed
        if user is not None:
            g.bendline_user = {"name": user["name"], "admin": bool(user.get("admin"))}
            return None
        if path.startswith(("/api/", "/_dash-", "/_reload")) or request.method != "GET":
            return jsonify({"error": {"message": "sign in first (or send an API token)"}}), 401
        return redirect(f"/login?next={_safe_next(request.full_path.rstrip('?'))}")

    @flask_app.route("/login", methods=["GET", "POST"])
    def login():
        if request.method == "GET":
            return login_page(next_path=request.args.get("next", "/"))
        name = (request.form.get("name") or "").strip()
        password = request.form.get("password") or ""
        next_path = _safe_next(request.form.get("next"))
        expected = session.get("login_csrf")
        if not expected or not secrets.compare_digest(expected, request.form.get("csrf") or ""):
            return login_page("The sign-in form expired; please try again.", next_path, name), 400
        ip = request.remote_addr or "?"
        wait = users.check_throttle(name, ip)
        if wait > 0:
            return login_page(f"Too many failed sign-ins; wait {wait:.0f} seconds and try again.",
                              next_path, name), 429
        user = users.verify(name, password)
        if user is None:
            users.record_failure(name, ip)
            return login_page("That name and password do not match.", next_path, name), 401
        users.clear_failures(name, ip)
        session.clear()
        session.permanent = True
        session["user"] = user["name"]
        session["sid"] = users.start_session(user["name"], session_hours)
        return redirect(next_path)

    @flask_app.route("/logout")
    def logout():
        if session.get("user"):
            users.end_session(session["user"], session.get("sid"))  # the cookie stops working everywhere
        session.clear()
        return redirect("/login")

    return flask_app
