"""Team mode refuses every unauthenticated request except sign-in and static assets."""

from __future__ import annotations

import re

import pytest

from .conftest import ADMIN, ADMIN_PW, USER, USER_PW

PUBLIC = re.compile(r"^/(login|_favicon\.ico|favicon\.ico|assets/.*|_dash-component-suites/.*)$")


@pytest.fixture
def client(redis_url, team_users):
    from bendline.app.team.wsgi import build_team_app

    app = build_team_app(redis_url, cookie_secure=True, maintain=False)
    app.server.config["TESTING"] = True
    return app.server.test_client(), app.server


def _sample_path(rule):
    path = rule.rule
    for arg in rule.arguments:
        if arg not in rule._converters:
            continue  # a default, not part of the path
        conv = rule._converters[arg].__class__.__name__
        path = re.sub(rf"<[^>]*{arg}>", "x/y" if conv == "PathConverter" else "0123456789abcdef", path)
    return path


def test_every_route_refuses_an_unauthenticated_request(client):
    c, server = client
    checked = 0
    for rule in server.url_map.iter_rules():
        path = _sample_path(rule)
        if PUBLIC.match(path):
            continue
        for method in sorted(rule.methods - {"HEAD", "OPTIONS"}):
            resp = c.open(path, method=method, json={} if method != "GET" else None)
            checked += 1
            assert resp.status_code in (302, 401, 403), (method, path, resp.status_code)
            if resp.status_code == 302:
                assert resp.headers["Location"].startswith("/login")
            body = resp.get_data(as_text=True)
            assert "trend_q50" not in body and "figure" not in body, (method, path)
    assert checked >= 10  # the page, Dash's routes, the API, briefing views and downloads
    # Dash's internal routes in particular
    for path in ("/_dash-layout", "/_dash-dependencies", "/", "/brief/0123456789abcdef", "/api/v1/runs"):
        assert c.get(path).status_code in (302, 401), path
    assert c.post("/_dash-update-component", json={"output": "x"}).status_code == 401


def _sign_in(c, name, password, next_path="/"):
    page = c.get(f"/login?next={next_path}").get_data(as_text=True)
    csrf = re.search(r'name="csrf" value="([^"]+)"', page).group(1)
    return c.post("/login", data={"name": name, "password": password, "csrf": csrf, "next": next_path})


def test_sign_in_sets_a_safe_cookie_and_opens_the_app(client):
    c, _ = client
    resp = _sign_in(c, ADMIN, ADMIN_PW, "/brief/0123456789abcdef")
    assert resp.status_code == 302 and resp.headers["Location"] == "/brief/0123456789abcdef"
    cookie = resp.headers["Set-Cookie"]
    assert "HttpOnly" in cookie and "SameSite=Lax" in cookie and "Secure" in cookie
    assert c.get("/_dash-layout").status_code == 200
    assert c.get("/logout").status_code == 302
    assert c.get("/_dash-layout").status_code == 401


def test_wrong_passwords_are_refused_and_then_slowed_down(client):
    c, _ = client
    assert _sign_in(c, USER, "not the password").status_code == 401
    for _ in range(5):
        _sign_in(c, USER, "still not it")
    resp = _sign_in(c, USER, USER_PW)
    assert resp.status_code == 429  # even the right password waits now
    assert "wait" in resp.get_data(as_text=True)


def test_the_sign_in_form_needs_its_token_and_only_follows_local_paths(client):
    c, _ = client
    assert c.post("/login", data={"name": ADMIN, "password": ADMIN_PW}).status_code == 400
    resp = _sign_in(c, ADMIN, ADMIN_PW, "//evil.example/x")
    assert resp.headers["Location"] == "/"


def test_api_tokens_work_and_bad_tokens_do_not(client, team_users):
    c, _ = client
    token = team_users.new_token(USER)
    assert c.get("/api/v1/runs", headers={"Authorization": f"Bearer {token}"}).status_code == 200
    assert c.get("/api/v1/runs", headers={"Authorization": "Bearer nope"}).status_code == 401


@pytest.mark.parametrize("target", ["/\t/evil.example", "/\n/evil.example", "/%09/evil.example".replace("%09", "\t"),
                                    "\t//evil.example", "/\\evil.example", "https://evil.example/x",
                                    "/\r\n/evil.example", " //evil.example"])
def test_after_sign_in_only_same_origin_paths_are_followed(client, target):
    # a browser drops tabs and line breaks from a URL: '/\t/evil.example' is '//evil.example'
    c, _ = client
    resp = _sign_in(c, ADMIN, ADMIN_PW, "/")
    page = c.get("/login").get_data(as_text=True)
    csrf = re.search(r'name="csrf" value="([^"]+)"', page).group(1)
    resp = c.post("/login", data={"name": ADMIN, "password": ADMIN_PW, "csrf": csrf, "next": target})
    assert resp.status_code == 302
    location = resp.headers["Location"]
    assert location == "/" or (location.startswith("/") and not location.startswith("//")
                               and "evil" not in location), location


def test_a_cookie_stops_working_at_sign_out_and_when_the_user_is_removed(client, team_users):
    from http.cookies import SimpleCookie

    c, server = client
    resp = _sign_in(c, USER, USER_PW)
    cookie = SimpleCookie(resp.headers["Set-Cookie"])["bendline_session"].value
    assert c.get("/_dash-layout").status_code == 200
    c.get("/logout")
    other = server.test_client()  # someone who kept a copy of the cookie
    other.set_cookie("bendline_session", cookie)
    assert other.get("/_dash-layout").status_code == 401
    # signed in again; then the account is removed and re-made under the same name
    resp = _sign_in(c, USER, USER_PW)
    cookie = SimpleCookie(resp.headers["Set-Cookie"])["bendline_session"].value
    team_users.remove(USER)
    team_users.add(USER, USER_PW)
    stale = server.test_client()
    stale.set_cookie("bendline_session", cookie)
    assert stale.get("/_dash-layout").status_code == 401
    assert stale.post("/api/v1/runs", json={"csv": "date,n\n2026-01-01,1\n", "spec": {}},
                      headers={"X-Bendline-Request": "1"}).status_code == 401
