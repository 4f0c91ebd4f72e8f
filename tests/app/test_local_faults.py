"""A local server killed mid-fit: its worker processes die with it, and the run stays failed after a restart."""

from __future__ import annotations

import json
import os
import signal
import subprocess
import time
import urllib.request

import pytest

from .browser.conftest import ROOT, Server

pytestmark = pytest.mark.slow
SAMPLE = os.path.join(ROOT, "sample_series", "daily_admissions.csv")
#: Work that cannot finish within the test on any machine (see tests/app/team/test_team_runs.py).
LONG = {"segments": 3, "chains": 4, "draws": 2000, "max_draws": 2000, "thin": 1000, "seed": 3,
        "max_seconds": 86400}


def _call(url, method="GET", body=None):
    data = json.dumps(body).encode() if body is not None else None
    req = urllib.request.Request(url, data=data, method=method, headers={"Content-Type": "application/json"})
    with urllib.request.urlopen(req, timeout=30) as resp:
        return json.loads(resp.read())


def _wait(check, what, timeout=90):
    deadline = time.time() + timeout
    while time.time() < deadline:
        value = check()
        if value:
            return value
        time.sleep(0.3)
    raise AssertionError(f"{what} never happened")


def _children(pid):
    out = subprocess.run(["ps", "-o", "pid=", "--ppid", str(pid)], capture_output=True, text=True)
    return {int(p) for p in out.stdout.split()}


def _alive(pid):
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    with open(f"/proc/{pid}/stat") as fh:  # a zombie is dead
        return fh.read().split()[2] != "Z"


def test_a_killed_server_takes_its_fits_with_it_and_the_run_stays_failed(tmp_path):
    with open(SAMPLE, encoding="utf-8") as fh:
        csv_text = fh.read()
    first = Server(tmp_path).start()
    try:
        run = _call(first.url + "/api/v1/runs", "POST", {"csv": csv_text, "spec": LONG})
        url = f"{first.url}/api/v1/runs/{run['id']}"
        _wait(lambda: _call(url)["status"] == "running", "the run starting")
        workers = _children(first.proc.pid)
        assert workers
        os.kill(first.proc.pid, signal.SIGKILL)  # the server alone, as a crash or the OOM killer would
        first.proc.wait(timeout=10)
        _wait(lambda: not any(_alive(p) for p in workers), "the worker processes ending", timeout=30)
    finally:
        first.stop()
    second = Server(tmp_path).start()
    try:
        url = f"{second.url}/api/v1/runs/{run['id']}"
        rec = _call(url)
        assert rec["status"] == "failed" and "server stopped" in rec["reason"]
        time.sleep(3)  # an orphan, had one survived, would write its final state about now
        rec = _call(url)
        assert rec["status"] == "failed" and rec["result"] is None
    finally:
        second.stop()
