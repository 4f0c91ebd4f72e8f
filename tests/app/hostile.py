"""A corpus of hostile and malformed requests, run against the local and the team server.

Each case is one request and the answers that count as clean. Clean means:
the status is one of ``expect`` (never a 500), the body carries no traceback,
no server path, no store address and no unescaped payload, and no header was
injected. ``accept`` cases are legitimate requests written oddly (numbers as
strings): they must be taken, and the spec stored must already be checked.

The cases come from a probe of both servers (OWASP Web Security Testing
Guide categories: input validation, HTTP splitting, open redirect, CSRF,
CSV injection, information disclosure) and from the option table's types.
"""

from __future__ import annotations

import json

DAILY_CSV = "date,count\n" + "".join(
    f"2026-01-{d:02d},{5 + d}\n" for d in range(1, 29))
SMALL = {"segments": 2, "chains": 4, "draws": 100, "seed": 3}
XSS = "<script>alert(1)</script>"


def _run(spec=None, csv=DAILY_CSV, **extra):
    return {"json": {"csv": csv, "spec": {**SMALL, **(spec or {})}, **extra}}


#: (name, method, path, request keyword arguments, acceptable statuses, refused option or None)
CASES = [
    # --- API specs: numbers as strings are coerced when unambiguous --------------------------------
    ("segments as text", "POST", "/api/v1/runs", _run({"segments": "3"}), {201, 202}, None),
    ("max_seconds as text", "POST", "/api/v1/runs", _run({"max_seconds": "60"}), {201, 202}, None),
    ("growth prior as text", "POST", "/api/v1/runs", _run({"growth_prior_pct": "20"}), {201, 202}, None),
    ("min segment days as text", "POST", "/api/v1/runs", _run({"min_segment_days": "7"}), {201, 202}, None),
    ("completeness as text list", "POST", "/api/v1/runs", _run({"completeness": "0.5,0.8"}), {201, 202}, None),
    # --- ... and refused, naming the option, when not -------------------------------------------------
    ("segments as words", "POST", "/api/v1/runs", _run({"segments": "three"}), {400}, "segments"),
    ("segments fractional", "POST", "/api/v1/runs", _run({"segments": 2.5}), {400}, "segments"),
    ("segments negative", "POST", "/api/v1/runs", _run({"segments": -1}), {400}, "segments"),
    ("segments huge", "POST", "/api/v1/runs", _run({"segments": 10 ** 9}), {400}, "segments"),
    ("segments boolean", "POST", "/api/v1/runs", _run({"segments": True}), {400}, "segments"),
    ("segments list", "POST", "/api/v1/runs", _run({"segments": [3]}), {400}, "segments"),
    ("max_seconds negative", "POST", "/api/v1/runs", _run({"max_seconds": -5}), {400}, "max_seconds"),
    ("max_seconds object", "POST", "/api/v1/runs", _run({"max_seconds": {"$gt": 1}}), {400}, "max_seconds"),
    ("growth prior text", "POST", "/api/v1/runs", _run({"growth_prior_pct": "lots"}), {400}, "growth_prior_pct"),
    ("completeness number", "POST", "/api/v1/runs", _run({"completeness": 5}), {400}, "completeness"),
    ("completeness dict", "POST", "/api/v1/runs", _run({"completeness": {"a": 1}}), {400}, "completeness"),
    ("completeness null inside", "POST", "/api/v1/runs", _run({"completeness": [0.5, None]}), {400},
     "completeness"),
    ("completeness text inside", "POST", "/api/v1/runs", _run({"completeness": ["x"]}), {400}, "completeness"),
    ("completeness above one", "POST", "/api/v1/runs", _run({"completeness": [1.5]}), {400}, "completeness"),
    ("family unknown", "POST", "/api/v1/runs", _run({"family": "gaussian"}), {400}, "family"),
    ("weekday maybe", "POST", "/api/v1/runs", _run({"weekday": "maybe"}), {400}, "weekday"),
    ("change date garbage", "POST", "/api/v1/runs", _run({"change_date": ["not-a-date"]}), {400},
     "change_date"),
    ("change date script", "POST", "/api/v1/runs", _run({"change_date": [XSS]}), {400}, "change_date"),
    ("gi mean text", "POST", "/api/v1/runs", _run({"gi_mean": "five"}), {400}, "gi_mean"),
    ("unknown option", "POST", "/api/v1/runs", _run({"rm -rf": 1}), {400}, "rm -rf"),
    ("spec is a list", "POST", "/api/v1/runs", {"json": {"csv": DAILY_CSV, "spec": [1, 2]}}, {400}, None),
    ("csv is a number", "POST", "/api/v1/runs", {"json": {"csv": 5, "spec": SMALL}}, {400}, None),
    ("csv missing", "POST", "/api/v1/runs", {"json": {"spec": SMALL}}, {400}, None),
    ("body not JSON", "POST", "/api/v1/runs",
     {"data": "{not json", "content_type": "application/json"}, {400}, None),
    ("body JSON null", "POST", "/api/v1/runs", {"data": "null", "content_type": "application/json"}, {400}, None),
    ("body is an array", "POST", "/api/v1/runs", {"json": [1, 2, 3]}, {400}, None),
    ("all-zero series", "POST", "/api/v1/runs",
     _run(csv="date,count\n" + "".join(f"2026-01-{d:02d},0\n" for d in range(1, 29))), {400}, None),
    ("one row", "POST", "/api/v1/runs", _run(csv="date,count\n2026-01-01,4\n"), {400}, None),
    ("negative counts only", "POST", "/api/v1/runs",
     _run(csv="date,count\n" + "".join(f"2026-01-{d:02d},-3\n" for d in range(1, 29))), {400}, None),
    ("formula in the header", "POST", "/api/v1/runs", _run(csv="=1+1,@x\n2026-01-01,1\n"), {400}, None),
    ("binary csv", "POST", "/api/v1/runs", _run(csv="\x00\x01\x02\xff" * 50), {400}, None),
    ("too large", "POST", "/api/v1/runs", _run(csv="date,count\n" + "2026-01-01,1\n" * 2_000_000), {413}, None),
    # --- paths ---------------------------------------------------------------------------------------
    ("traversal in run id", "GET", "/api/v1/runs/..%2F..%2Fetc%2Fpasswd", {}, {404}, None),
    ("NUL in run id", "GET", "/api/v1/runs/%00", {}, {404}, None),
    ("script as run id", "GET", "/api/v1/runs/%3Cscript%3E", {}, {404}, None),
    ("stop unknown run", "POST", "/api/v1/runs/0123456789abcdef/stop", {}, {404}, None),
    ("delete unknown run", "DELETE", "/api/v1/runs/0123456789abcdef", {}, {404}, None),
    ("unknown API route", "GET", "/api/v1/nothing", {}, {404}, None),
    ("wrong method", "PUT", "/api/v1/runs", {"json": {}}, {405}, None),
    ("CR LF in path", "GET", "/%0d%0aSet-Cookie:%20owned=1", {}, {404}, None),
    ("component suites junk", "GET", "/_dash-component-suites/x/y", {}, {404}, None),
    ("component suites traversal", "GET", "/_dash-component-suites/../../pyproject.toml", {}, {404}, None),
    ("favicon", "GET", "/favicon.ico", {}, {204}, None),
    ("report of unknown run", "GET", "/download/0123456789abcdef/report.html", {}, {404}, None),
    ("page that does not exist", "GET", "/report/0123456789abcdef", {}, {404}, None),
    ("brief without a run", "GET", "/brief/", {}, {404}, None),
    ("brief of unknown run", "GET", "/brief/0123456789abcdef", {}, {404}, None),
    ("brief update junk", "POST", "/brief/_dash-update-component", {"json": {"output": 5}}, {400}, None),
    ("brief of script id", "GET", "/brief/%3Cscript%3Ealert(1)%3C%2Fscript%3E", {}, {404}, None),
    ("download unknown table", "GET", "/download/0123456789abcdef/passwd", {}, {404}, None),
    ("download traversal", "GET", "/download/..%2F..%2Fetc/passwd", {}, {404}, None),
    # --- Dash's own routes fed garbage ---------------------------------------------------------------
    ("update without body", "POST", "/_dash-update-component", {"data": "", "content_type": "application/json"},
     {400}, None),
    ("update with junk JSON", "POST", "/_dash-update-component", {"json": {"output": 5}}, {400}, None),
    ("update unknown output", "POST", "/_dash-update-component",
     {"json": {"output": "nope.children", "outputs": {"id": "nope", "property": "children"},
               "inputs": [], "changedPropIds": []}}, {400}, None),
    ("update with a list", "POST", "/_dash-update-component", {"json": [1]}, {400}, None),
    # --- cross-site writes ---------------------------------------------------------------------------
    ("foreign origin POST", "POST", "/api/v1/runs", {**_run(), "headers": {"Origin": "https://evil.example"}},
     {403}, None),
    ("null origin POST", "POST", "/api/v1/runs", {**_run(), "headers": {"Origin": "null"}}, {403}, None),
    ("foreign origin DELETE", "DELETE", "/api/v1/runs/0123456789abcdef",
     {"headers": {"Origin": "https://evil.example"}}, {403}, None),
]


def leaks(text, *secrets, html=True):
    """What an answer gives away that it must not: a traceback, a path, a secret or a live payload.

    A payload echoed in a JSON error is inert (served as application/json
    with nosniff); in HTML it must be escaped.
    """
    found = []
    for marker in ("Traceback", 'File "', "site-packages", "Werkzeug/", "redis://", *secrets):
        if marker and marker in text:
            found.append(marker)
    if html and XSS in text:
        found.append("unescaped script")
    return found


def check(client, case, *, secrets=(), headers=None):
    """Send one case; return a list of problems (empty when the answer is clean)."""
    name, method, path, kwargs, expect, option = case
    kwargs = dict(kwargs)
    kwargs["headers"] = {**(headers or {}), **kwargs.get("headers", {})}
    response = client.open(path, method=method, **kwargs)
    text = response.get_data(as_text=True)
    problems = []
    if response.status_code not in expect:
        problems.append(f"status {response.status_code}, expected {sorted(expect)}: {text[:200]}")
    problems += [f"leaks {m}" for m in leaks(text, *secrets, html=response.mimetype != "application/json")]
    if any(h.lower() == "set-cookie" and "owned" in v for h, v in response.headers.items()):
        problems.append("header injected")
    if option is not None and response.status_code == 400:
        try:
            message = json.dumps(response.get_json())
        except Exception:  # noqa: BLE001 - a non-JSON answer is itself a finding
            message = text
        if option not in message:
            problems.append(f"the refusal does not name {option!r}: {message[:200]}")
    return problems
