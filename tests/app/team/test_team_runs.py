"""Fits on real Celery workers behind a real team server: API, faults, restarts.

Every wait is bounded; processes are stopped by their pids in the fixtures.
"""

from __future__ import annotations

import json
import os
import time
import urllib.error
import urllib.request
import uuid

import pytest

from ...app.redis_server import RedisServer
from ..browser.conftest import ROOT, Server
from .conftest import USER, Worker

pytestmark = [pytest.mark.team, pytest.mark.slow]
SAMPLE = os.path.join(ROOT, "sample_series", "daily_admissions.csv")
FAST = {"segments": 3, "chains": 4, "draws": 100, "seed": 3}
#: A run that cannot finish within any test: 2000 kept draws, each the last of
#: 1000 iterations (two million HMC iterations per chain, hours on any machine
#: of this kind), so a test that needs a run still sampling never depends on
#: the machine's speed. Tests stop it themselves.
LONG = {"segments": 3, "chains": 4, "draws": 2000, "max_draws": 2000, "thin": 1000, "seed": 3,
        "max_seconds": 86400}


class Api:
    """A tiny JSON client with a bearer token."""

    def __init__(self, base, token):
        self.base, self.token = base, token

    def call(self, method, path, body=None, timeout=30):
        data, headers = None, {"Authorization": f"Bearer {self.token}"}
        if isinstance(body, dict):
            data, headers["Content-Type"] = json.dumps(body).encode(), "application/json"
        req = urllib.request.Request(self.base + path, data=data, method=method, headers=headers)
        try:
            with urllib.request.urlopen(req, timeout=timeout) as resp:
                return resp.status, json.loads(resp.read() or b"null")
        except urllib.error.HTTPError as err:
            return err.code, json.loads(err.read() or b"null")

    def submit_file(self, path, spec, endpoint="/api/v1/runs"):
        boundary = uuid.uuid4().hex
        with open(path, "rb") as fh:
            payload = fh.read()
        body = (
            f"--{boundary}\r\nContent-Disposition: form-data; name=\"spec\"\r\n\r\n{json.dumps(spec)}\r\n"
            f"--{boundary}\r\nContent-Disposition: form-data; name=\"file\"; filename=\"data.csv\"\r\n"
            "Content-Type: text/csv\r\n\r\n"
        ).encode() + payload + f"\r\n--{boundary}--\r\n".encode()
        req = urllib.request.Request(self.base + endpoint, data=body, method="POST", headers={
            "Authorization": f"Bearer {self.token}", "Content-Type": f"multipart/form-data; boundary={boundary}"})
        with urllib.request.urlopen(req, timeout=30) as resp:
            return json.loads(resp.read())

    def wait(self, run_id, statuses, timeout=120):
        deadline = time.time() + timeout
        rec = None
        while time.time() < deadline:
            code, rec = self.call("GET", f"/api/v1/runs/{run_id}")
            if code == 200 and rec["status"] in statuses:
                return rec
            time.sleep(0.5)
        raise AssertionError(f"run {run_id} never reached {statuses}; last: {rec}")


@pytest.fixture
def api(team_server, team_users):
    return Api(team_server.url, team_users.new_token(USER))


def test_a_fit_runs_on_a_worker_and_the_api_returns_its_result(api, workers):
    workers("w1", concurrency=2)
    run = api.submit_file(SAMPLE, FAST)
    rec = api.wait(run["id"], ("converged", "unconverged"))
    assert rec["owner"] == USER
    result = rec["result"]
    for key in ("series", "spec", "diagnostics", "changepoints", "segments", "current", "band", "projection",
                "data_quality"):
        assert key in result
    assert len(result["segments"]) == 3
    code, listing = api.call("GET", "/api/v1/runs")
    assert code == 200 and run["id"] in [r["id"] for r in listing["runs"]]


def test_a_killed_worker_leaves_a_failed_run_and_others_carry_on(api, workers, redis_url):
    from bendline.app.store.redis_store import RedisRunStore

    store = RedisRunStore(redis_url)
    w1, w2 = workers("w1"), workers("w2")
    a = api.submit_file(SAMPLE, LONG)
    b = api.submit_file(SAMPLE, dict(LONG, seed=4))
    api.wait(a["id"], ("running",), timeout=90)
    api.wait(b["id"], ("running",), timeout=90)
    # each worker runs one fit at a time, so the two runs are on different workers
    pid_a = int(store.get_run(a["id"])["worker"].rsplit(":", 1)[1])
    victim, killed, survivor = (w1, a["id"], b["id"]) if pid_a in _pids(w1) else (w2, a["id"], b["id"])
    if victim is w2 and pid_a not in _pids(w2):
        raise AssertionError("run a is on neither worker")
    victim.kill()
    t_kill = time.time()
    failed = api.wait(killed, ("failed",), timeout=60)  # the heartbeat runs out within 60 s
    assert "heartbeat" in failed["reason"] and time.time() - t_kill <= 60
    code, other = api.call("GET", f"/api/v1/runs/{survivor}")
    assert other["status"] == "running"  # the other run is still sampling, untouched
    api.call("POST", f"/api/v1/runs/{survivor}/stop")
    api.wait(survivor, ("stopped",), timeout=30)
    # the failed run is resubmitted and finishes on the remaining worker
    again = api.submit_file(SAMPLE, FAST)
    assert api.wait(again["id"], ("converged", "unconverged"), timeout=120)["result"] is not None


def _pids(worker):
    """The worker's main process and its pool children (its process group)."""
    import subprocess

    out = subprocess.run(["ps", "-o", "pid=", "-g", str(worker.proc.pid)], capture_output=True, text=True)
    return {int(p) for p in out.stdout.split()}


def test_a_stopped_run_frees_its_worker_promptly(api, workers):
    workers("w1")
    long_run = api.submit_file(SAMPLE, LONG)
    api.wait(long_run["id"], ("running",), timeout=90)
    code, rec = api.call("POST", f"/api/v1/runs/{long_run['id']}/stop")
    assert code == 202
    api.wait(long_run["id"], ("stopped",), timeout=20)
    nxt = api.submit_file(SAMPLE, FAST)
    api.wait(nxt["id"], ("running", "converged", "unconverged"), timeout=30)  # the one worker took it


def test_runs_results_and_users_survive_a_web_server_restart(redis_url, team_users, tmp_path, workers):
    workers("w1", concurrency=2)
    token = team_users.new_token(USER)
    first = Server(tmp_path, "--team", "--redis", redis_url, "--insecure-cookies").start()
    try:
        api = Api(first.url, token)
        run = api.submit_file(SAMPLE, FAST)
        done = api.wait(run["id"], ("converged", "unconverged"))
    finally:
        first.stop()
    second = Server(tmp_path, "--team", "--redis", redis_url, "--insecure-cookies").start()
    try:
        api = Api(second.url, token)  # the same token (users live in Redis)
        code, again = api.call("GET", f"/api/v1/runs/{run['id']}")
        assert code == 200 and again["result"] == done["result"]
    finally:
        second.stop()


def test_an_unreachable_redis_is_reported_quickly_and_work_resumes(tmp_path):
    from bendline.app.team.users import UserStore

    redis = RedisServer(tmp_path / "own-redis", appendonly=True).start()
    worker = None
    web = None
    try:
        users = UserStore(redis.url)
        users.add("cy", "a long test password")
        token = users.new_token("cy")
        web = Server(tmp_path, "--team", "--redis", redis.url, "--insecure-cookies").start()
        worker = Worker(redis.url, tmp_path, "w1").start()
        api = Api(web.url, token)
        redis.stop()
        t0 = time.time()
        code, body = api.call("GET", "/api/v1/runs", timeout=20)
        assert code in (401, 503) and time.time() - t0 < 15  # no spinning: an answer within seconds
        assert "unavailable" in json.dumps(body).lower() or code == 401
        redis.start()
        deadline = time.time() + 30
        while time.time() < deadline:
            code, _ = api.call("GET", "/api/v1/runs")
            if code == 200:
                break
            time.sleep(0.5)
        assert code == 200
        run = api.submit_file(SAMPLE, FAST)
        assert api.wait(run["id"], ("converged", "unconverged"), timeout=120)["result"] is not None
    finally:
        if worker:
            worker.stop()
        if web:
            web.stop()
        redis.stop()


def test_a_run_from_another_engine_version_is_refused_with_the_reason(redis_url, workers, api):
    from bendline.app.store.redis_store import RedisRunStore

    workers("w1")
    run = api.submit_file(SAMPLE, LONG)
    api.wait(run["id"], ("running",), timeout=90)
    api.call("POST", f"/api/v1/runs/{run['id']}/stop")
    # a record written by a server on other code: the worker says so and does not fit it
    store = RedisRunStore(redis_url)
    rec = dict(store.get_run(run["id"]), id="f" * 16, status="queued", code_version="0.0.0-elsewhere")
    store.create_run(rec, store.get_series(run["id"]))
    from bendline.app.team.tasks import CeleryExecutor

    CeleryExecutor(redis_url).submit("f" * 16)
    failed = api.wait("f" * 16, ("failed",), timeout=60)
    assert "version" in failed["reason"]


def test_a_running_fit_survives_a_redis_outage_longer_than_the_heartbeat_timeout(tmp_path):
    """Redis away for longer than HEARTBEAT_TIMEOUT: the worker keeps its claim and the run is not failed.

    The outage's length is the scenario (it must outlast the heartbeat
    timeout), not a guess at the machine's speed: the run is held open by
    LONG's work and stopped by the test.
    """
    from bendline.app.runs import HEARTBEAT_TIMEOUT
    from bendline.app.team.users import UserStore

    redis = RedisServer(tmp_path / "own-redis", appendonly=True).start()
    worker = web = None
    try:
        users = UserStore(redis.url)
        users.add("cy", "a long test password")
        token = users.new_token("cy")
        web = Server(tmp_path, "--team", "--redis", redis.url, "--insecure-cookies").start()
        worker = Worker(redis.url, tmp_path, "w1").start()
        api = Api(web.url, token)
        run = api.submit_file(SAMPLE, LONG)
        api.wait(run["id"], ("running",), timeout=90)
        redis.stop()
        time.sleep(HEARTBEAT_TIMEOUT + 8)
        redis.start()
        deadline = time.time() + 30
        code = None
        while time.time() < deadline:
            code, rec = api.call("GET", f"/api/v1/runs/{run['id']}")
            if code == 200:
                break
            time.sleep(0.5)
        assert code == 200
        # the web server's reaper gets a full heartbeat period after the outage before judging
        time.sleep(HEARTBEAT_TIMEOUT / 3)
        rec = api.wait(run["id"], ("running",), timeout=10)
        assert not rec.get("reason"), rec
        api.call("POST", f"/api/v1/runs/{run['id']}/stop")
        done = api.wait(run["id"], ("stopped", "unconverged", "converged"), timeout=120)
        assert done["status"] != "failed" and "heartbeat" not in (done.get("reason") or ""), done
    finally:
        if worker:
            worker.stop()
        if web:
            web.stop()
        redis.stop()
